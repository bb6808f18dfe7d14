using System.Diagnostics;
using System.Text.Json;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Tracks;
using Strayspot.Service.Batches;
using Strayspot.Service.Inference;
using Strayspot.Service.Reports;
using Strayspot.Service.Rendering;

namespace Strayspot.Service.Recordings;

/// <summary>How a recording's regions become tracks and which tracks count.</summary>
public sealed record TrackingSettings
{
    public TrackLinkOptions Linking { get; init; } = new();
    /// <summary>The persistence rule: tracks seen in fewer sampled frames are reported but not kept (1 keeps all).</summary>
    public int MinimumFramesSeen { get; init; } = 3;
    /// <summary>Kept tracks closer in time than this merge into one segment for the labelling queue.</summary>
    public double SegmentGapSeconds { get; init; } = 1.0;
}

/// <summary>
/// Scores a recording frame by frame through the frame runner and writes its outputs into a folder:
/// <c>frames.jsonl</c> (one line per sampled frame, with its timestamp), <c>tracks.json</c> (tracks and the ranked
/// time segments), <c>score-over-time.png</c>, and <c>tracks/track-NNNN.png</c> (each track's best frame with its
/// overlay, rewritten while the recording streams whenever the track finds a higher region score).
/// </summary>
public static class RecordingRun
{
    public const string FramesFile = "frames.jsonl";
    public const string TracksFile = "tracks.json";
    public const string PlotFile = "score-over-time.png";
    public const string TracksFolder = "tracks";

    /// <returns>The report as <c>tracks.json</c> holds it, but with only the kept tracks, without their sightings (the file has every track whole).</returns>
    public static RecordingReport Score(FrameRunner runner, ModelLease model, IRecording recording, string source, RecordingSampling sampling,
        ScoringOptions options, TrackingSettings tracking, string folder, IProgress<int>? progress = null, CancellationToken cancel = default)
    {
        Directory.CreateDirectory(Path.Combine(folder, TracksFolder));
        var linker = new TrackLinker(tracking.Linking);
        var times = new List<double>();
        var scores = new List<double>();
        var best = new Dictionary<int, float>();
        var names = model.Version.ClassNames;
        // Finished tracks go to a scratch file as they close, so what stays in memory is the open tracks and the kept
        // tracks' summaries, not every sighting of a long recording; tracks.json is written from the file at the end.
        using var spill = new FileStream(Path.Combine(folder, TracksFile + ".sightings.part"), FileMode.Create, FileAccess.ReadWrite,
            FileShare.None, 1 << 16, FileOptions.DeleteOnClose);
        var spilled = new List<(int Id, long Offset, int Length)>();
        var keptTracks = new List<TrackReport>();
        void Spill(IReadOnlyList<Track> closed)
        {
            var keep = PersistenceRule.Keep(closed, tracking.MinimumFramesSeen).Select(k => k.Id).ToHashSet();
            foreach (var k in closed)
            {
                var r = TrackReport.From(k, keep.Contains(k.Id), recording.Name, model.Version.ClassNames, Path.Combine(TracksFolder, OverlayName(k.Id)));
                byte[] json = JsonSerializer.SerializeToUtf8Bytes(r, Compact);
                spilled.Add((k.Id, spill.Position, json.Length));
                spill.Write(json);
                if (r.Kept) keptTracks.Add(r with { Sightings = null });
                best.Remove(k.Id);
            }
        }
        double decodeMs = 0, scoreMs = 0;
        int scored = 0;
        IReadOnlyList<ReportWarning>? warnings = null;
        string framesPath = Path.Combine(folder, FramesFile);
        using (var lines = new StreamWriter(framesPath + ".part"))
        {
            long t = Stopwatch.GetTimestamp();
            foreach (var rf in recording.Frames(cancel))
            {
                decodeMs += Stopwatch.GetElapsedTime(t).TotalMilliseconds;
                using (rf)
                {
                    long s0 = Stopwatch.GetTimestamp();
                    var line = runner.Score(model, rf.Frame, options, (s, t) =>
                    {
                        warnings ??= t.Warnings;
                        var regions = s.Regions.Regions;
                        var assigned = linker.Add(rf.Sample, rf.Index, rf.TimeSeconds, s.Width, s.Height, regions);
                        Spill(linker.TakeClosed());
                        var reports = Manifest.Regions(s, names);
                        string? written = null;
                        for (int i = 0; i < regions.Count; i++)
                        {
                            int id = assigned[i];
                            reports[i] = reports[i] with { Track = id };
                            if (best.TryGetValue(id, out float top) && top >= regions[i].MaxScore) continue;
                            best[id] = regions[i].MaxScore;
                            string path = Path.Combine(folder, TracksFolder, OverlayName(id));
                            // The overlay shows the whole frame, so one rendering serves every track that peaks in it.
                            if (written is not null) { File.Copy(written, path, overwrite: true); continue; }
                            using var overlay = OverlayRenderer.Render(rf.Frame.Image, s.AnomalyScore, s.Mask, regions,
                                HeatScale.For(s, ArtifactOptions.Default.HeatScale));
                            AtomicFile.Write(path, st => ArtifactRenderer.SavePng(overlay, st));
                            written = path;
                        }
                        return new RecordingFrameLine(rf.Id, rf.Index, Math.Round(rf.TimeSeconds, 6), s.FrameScore, s.AnomalousShare, reports);
                    }, cancel);
                    scoreMs += Stopwatch.GetElapsedTime(s0).TotalMilliseconds;
                    lines.WriteLine(JsonSerializer.Serialize(line, Compact));
                    times.Add(rf.TimeSeconds);
                    scores.Add(line.FrameScore);
                }
                scored++;
                progress?.Report(scored);
                t = Stopwatch.GetTimestamp();
            }
        }
        File.Move(framesPath + ".part", framesPath, overwrite: true);

        Spill(linker.TakeClosed(all: true));
        spilled.Sort((a, b) => a.Id.CompareTo(b.Id));
        keptTracks.Sort((a, b) => a.Id.CompareTo(b.Id));
        var report = new RecordingReport
        {
            Recording = recording.Name, Source = source, Frame = new SizeReport(recording.Width, recording.Height),
            Sampling = sampling.ToString(), FramesScored = scored, DurationSeconds = times.Count > 0 ? times[^1] - times[0] : 0,
            Threshold = options.Threshold, Linking = tracking.Linking, MinimumFramesSeen = tracking.MinimumFramesSeen,
            TracksFound = spilled.Count, TracksKept = keptTracks.Count, Tracks = keptTracks,
            Segments = Segments(keptTracks, tracking.SegmentGapSeconds),
            Notes = recording.Notes.ToList(), Warnings = warnings ?? [],
            TimingsMs = new() { ["decode"] = Math.Round(decodeMs, 1), ["score"] = Math.Round(scoreMs, 1) },
        };
        // Streamed out: every track with its sightings, read back one at a time in id order.
        AtomicFile.Write(Path.Combine(folder, TracksFile), st => JsonSerializer.Serialize(st, report with { Tracks = new SpilledTracks(spill, spilled) },
            FrameReport.JsonOptions));
        AtomicFile.WriteAllBytes(Path.Combine(folder, PlotFile), RecordingPlot.Render(report, times, scores));
        return report;
    }

    /// <summary>Tracks written to the scratch file, read back one by one in the given order while tracks.json is serialized.</summary>
    private sealed class SpilledTracks(FileStream file, List<(int Id, long Offset, int Length)> entries) : IReadOnlyList<TrackReport>
    {
        public int Count => entries.Count;

        public TrackReport this[int index]
        {
            get
            {
                var (_, offset, length) = entries[index];
                var bytes = new byte[length];
                file.Seek(offset, SeekOrigin.Begin);
                file.ReadExactly(bytes);
                return JsonSerializer.Deserialize<TrackReport>(bytes, Compact)!;
            }
        }

        public IEnumerator<TrackReport> GetEnumerator()
        {
            for (int i = 0; i < entries.Count; i++) yield return this[i];
        }

        System.Collections.IEnumerator System.Collections.IEnumerable.GetEnumerator() => GetEnumerator();
    }

    public static string OverlayName(int trackId) => $"track-{trackId:D4}.png";

    /// <summary>Kept tracks merged into segments where their spans overlap or lie within <paramref name="gap"/>; highest score first.</summary>
    public static IReadOnlyList<TimeSegment> Segments(IReadOnlyList<TrackReport> kept, double gap)
    {
        var ordered = kept.OrderBy(k => k.FirstTime).ThenBy(k => k.Id).ToList();
        var merged = new List<(double Start, double End, List<TrackReport> Tracks)>();
        foreach (var k in ordered)
        {
            if (merged.Count > 0 && k.FirstTime <= merged[^1].End + gap)
            {
                var m = merged[^1];
                m.Tracks.Add(k);
                merged[^1] = (m.Start, Math.Max(m.End, k.LastTime), m.Tracks);
            }
            else merged.Add((k.FirstTime, k.LastTime, [k]));
        }
        var segments = merged.Select(m =>
        {
            var top = m.Tracks.OrderByDescending(k => k.MaxScore).ThenBy(k => k.Id).First();
            return (m.Start, m.End, top.MaxScore, Ids: (IReadOnlyList<int>)m.Tracks.Select(k => k.Id).ToList(), top.BestFrameId);
        }).OrderByDescending(s => s.MaxScore).ThenBy(s => s.Start).ToList();
        return segments.Select((s, i) => new TimeSegment(i + 1, s.Start, s.End, s.MaxScore, s.Ids, s.BestFrameId)).ToList();
    }

    private static readonly JsonSerializerOptions Compact = new(FrameReport.JsonOptions) { WriteIndented = false };
}
