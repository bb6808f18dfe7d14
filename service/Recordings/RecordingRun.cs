using System.Diagnostics;
using System.Text.Json;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Tracks;
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

    public static RecordingReport Score(FrameRunner runner, ModelLease model, IRecording recording, string source, RecordingSampling sampling,
        ScoringOptions options, TrackingSettings tracking, string folder, IProgress<int>? progress = null, CancellationToken cancel = default)
    {
        Directory.CreateDirectory(Path.Combine(folder, TracksFolder));
        var linker = new TrackLinker(tracking.Linking);
        var times = new List<double>();
        var scores = new List<double>();
        var best = new Dictionary<int, float>();
        var names = model.Version.ClassNames;
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
                        var reports = new List<RegionReport>(regions.Count);
                        var trackIds = new int[regions.Count];
                        string? written = null;
                        for (int i = 0; i < regions.Count; i++)
                        {
                            reports.Add(RegionReport.From(regions[i], names));
                            int id = trackIds[i] = assigned[i];
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
                        return new RecordingFrameLine(rf.Id, rf.Index, Math.Round(rf.TimeSeconds, 6), s.FrameScore, s.AnomalousShare, reports, trackIds);
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

        var tracks = linker.Tracks();
        var kept = new HashSet<int>(PersistenceRule.Keep(tracks, tracking.MinimumFramesSeen).Select(k => k.Id));
        var trackReports = tracks.Select(k => TrackReport.From(k, kept.Contains(k.Id), recording.Name, names,
            Path.Combine(TracksFolder, OverlayName(k.Id)))).ToList();
        var report = new RecordingReport
        {
            Recording = recording.Name, Source = source, Frame = new SizeReport(recording.Width, recording.Height),
            Sampling = sampling.ToString(), FramesScored = scored, DurationSeconds = times.Count > 0 ? times[^1] - times[0] : 0,
            Threshold = options.Threshold, Linking = tracking.Linking, MinimumFramesSeen = tracking.MinimumFramesSeen,
            TracksFound = tracks.Count, TracksKept = kept.Count, Tracks = trackReports,
            Segments = Segments(trackReports.Where(k => k.Kept).ToList(), tracking.SegmentGapSeconds),
            Notes = recording.Notes.ToList(), Warnings = warnings ?? [],
            TimingsMs = new() { ["decode"] = Math.Round(decodeMs, 1), ["score"] = Math.Round(scoreMs, 1) },
        };
        AtomicFile.WriteAllBytes(Path.Combine(folder, TracksFile), JsonSerializer.SerializeToUtf8Bytes(report, FrameReport.JsonOptions));
        AtomicFile.WriteAllBytes(Path.Combine(folder, PlotFile), RecordingPlot.Render(report, times, scores));
        return report;
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
