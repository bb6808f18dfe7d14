using System.Globalization;
using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Recordings;
using Strayspot.Service.Reports;
using Strayspot.Service.Review;

namespace Strayspot.Service.Batches;

/// <summary>
/// A recording's summary on its manifest line: its span, every track (kept or not, as in <c>tracks.json</c> but
/// without the sightings, so the line grows with the tracks, not the frames) and the ranked time segments.
/// </summary>
public sealed record RecordingTimeline(
    [property: JsonPropertyName("durationSeconds")] double DurationSeconds,
    [property: JsonPropertyName("framesScored")] int FramesScored,
    [property: JsonPropertyName("minimumFramesSeen")] int MinimumFramesSeen,
    [property: JsonPropertyName("tracksFound")] int TracksFound,
    [property: JsonPropertyName("tracksKept")] int TracksKept,
    [property: JsonPropertyName("tracks")] IReadOnlyList<TrackReport> Tracks,
    [property: JsonPropertyName("segments")] IReadOnlyList<TimeSegment> Segments);

/// <summary>
/// Recordings inside batches: a video file in a submitted folder or archive is one work item, scored whole into its
/// folder (<c>tracks.json</c>, <c>frames.jsonl</c> with each sampled frame's timestamp, the plot and the tracks' best
/// frames). In the store its regions are its kept tracks, so a decision on region N of that work item is a decision
/// on track N; in the manifest it becomes a recording line and one line per sampled frame, on whose regions the
/// decision on their track shows.
/// </summary>
public static class BatchRecordings
{
    /// <summary>A frame or a video file: what folders and archives contribute to a batch.</summary>
    public static bool IsInput(string name)
    {
        string ext = Path.GetExtension(name).ToLowerInvariant();
        return FrameFormats.Extensions.Contains(ext) || VideoRecording.Extensions.Contains(ext);
    }

    public static string Accepted => string.Join("/", FrameFormats.Extensions.Concat(VideoRecording.Extensions));

    /// <summary>Manifest artifact names of a recording's line, relative to its folder.</summary>
    public static readonly (string Key, string File)[] ArtifactFiles =
    [
        ("tracks", RecordingRun.TracksFile), ("frames", RecordingRun.FramesFile), ("plot", RecordingRun.PlotFile),
    ];

    /// <summary>Scores the video at <paramref name="source"/> into <paramref name="folder"/>; the line's score is the highest kept track's.</summary>
    public static (float Score, List<ManifestRegion> Tracks) Score(FrameRunner runner, ModelLease model, string source, string folder, long maxPixels,
        CancellationToken cancel)
    {
        var options = new RecordingOptions { MaxPixels = maxPixels };
        var video = VideoRecording.Open(source, options, cancel);
        var tracking = new TrackingSettings();
        var report = RecordingRun.Score(runner, model, video, Path.GetFileName(source), options.Sampling, model.Version.Defaults, tracking, folder,
            cancel: cancel);
        var tracks = new List<ManifestRegion>();
        float score = float.NegativeInfinity;
        foreach (var t in report.Tracks)
        {
            if (!t.Kept) continue;
            score = Math.Max(score, t.MaxScore);
            tracks.Add(new ManifestRegion(t.Id, t.BestBox, t.FramesSeen, t.MeanScore, t.MaxScore,
                t.ClassBeneath, t.ClassBeneathName, false, []));
        }
        return (float.IsFinite(score) ? score : 0f, tracks);
    }

    /// <summary>A single uploaded video (not an archive) becomes a batch of one recording; returns its relative path.</summary>
    public static string TakeUpload(string upload, string[] nameParts, string destination, long maxBytes)
    {
        if (nameParts.Length != 1)
            throw new BatchException(Api.ErrorCodes.ArchiveInvalid, "The uploaded recording has no file name.");
        long length = new FileInfo(upload).Length;
        if (length > maxBytes)
            throw new BatchException(Api.ErrorCodes.ArchiveTooLarge,
                $"The uploaded recording is {length:N0} bytes; at most {maxBytes:N0} are accepted (Service:Batches:MaxArchiveBytes).");
        File.Copy(upload, Path.Combine(destination, nameParts[0]), overwrite: true);
        return nameParts[0];
    }

    /// <summary>
    /// The manifest lines of a scored recording: its own line (kept tracks as regions, the timeline, the decision on
    /// the whole recording), then one line per sampled frame in time order with its index, timestamp, the ranked
    /// segment it falls in, and each region's track and that track's decision. Frame ids are the recording's id, '@'
    /// and the frame index, unique in the batch. With <paramref name="onlyVerdict"/>, only lines carrying it.
    /// </summary>
    public static IEnumerable<ManifestLine> Lines(string batchFolder, BatchRecord batch, FrameRecord recording,
        Func<int, int?, Decision?> decisionOn, string? onlyVerdict)
    {
        string folder = Path.GetDirectoryName(recording.ReportPath!)!.Replace('\\', '/');
        var artifacts = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (var (key, file) in ArtifactFiles) artifacts[key] = folder + "/" + file;
        var report = ReadReport(Path.Combine(batchFolder, recording.ReportPath!));
        var tracks = Manifest.ReadRegions(recording.RegionsJson);
        bool keep = onlyVerdict is null;
        for (int i = 0; i < tracks.Count; i++)
        {
            if (decisionOn(recording.Seq, tracks[i].Id) is not { } d) continue;
            tracks[i] = tracks[i] with { Decision = DecisionMark.From(d) };
            keep |= d.Verdict == onlyVerdict;
        }
        var whole = decisionOn(recording.Seq, null);
        keep |= whole?.Verdict == onlyVerdict;
        if (keep)
            yield return new ManifestLine(recording.Seq, recording.FrameId, recording.SourcePath, recording.FrameScore, tracks, artifacts,
                batch.Model, batch.ModelSha256, batch.ProfileVersion, Decision: whole is null ? null : DecisionMark.From(whole),
                Kind: ManifestKinds.Recording, Recording: recording.FrameId, Timeline: report is null ? null : Timeline(report, recording.FrameId, folder),
                Warnings: Manifest.Any(report?.Warnings));

        string framesPath = Path.Combine(batchFolder, folder, RecordingRun.FramesFile);
        if (!File.Exists(framesPath)) yield break;
        var segments = report?.Segments ?? [];
        var marks = new Dictionary<int, DecisionMark?>();
        foreach (string text in File.ReadLines(framesPath))
        {
            if (ReadFrameLine(text) is not { } line) continue;
            var regions = new List<ManifestRegion>(line.Regions.Count);
            bool keepFrame = onlyVerdict is null;
            foreach (var r in line.Regions)
            {
                DecisionMark? mark = null;
                if (r.Track is int track && !marks.TryGetValue(track, out mark))
                {
                    var d = decisionOn(recording.Seq, track);
                    marks[track] = mark = d is null ? null : DecisionMark.From(d);
                }
                keepFrame |= mark?.Verdict == onlyVerdict;
                regions.Add(mark is null ? r : r with { Decision = mark });
            }
            if (!keepFrame) continue;
            int? segment = null;
            foreach (var s in segments)
                if (line.TimeSeconds >= s.StartSeconds && line.TimeSeconds <= s.EndSeconds) { segment = s.Rank; break; }
            yield return new ManifestLine(recording.Seq, RecordingFrame.IdOf(recording.FrameId, line.Index), recording.SourcePath, line.FrameScore,
                regions, artifacts, batch.Model, batch.ModelSha256, batch.ProfileVersion, Kind: ManifestKinds.RecordingFrame,
                Recording: recording.FrameId, Index: line.Index, TimeSeconds: line.TimeSeconds, Segment: segment);
        }
    }

    /// <summary>
    /// The timeline of a recording's line: frame ids renamed to the manifest's (the recording's id in the batch), overlay
    /// paths made relative to the batch folder like every manifest path (<paramref name="folder"/> is the recording's).
    /// </summary>
    public static RecordingTimeline Timeline(RecordingReport report, string recordingId, string folder)
    {
        string Rename(string frameId) => RecordingFrame.IdOf(recordingId, long.Parse(frameId[(frameId.LastIndexOf('@') + 1)..], CultureInfo.InvariantCulture));
        var tracks = report.Tracks.Select(t => t with
        {
            BestFrameId = Rename(t.BestFrameId), Sightings = null, BestOverlay = t.BestOverlay is null ? null : folder + "/" + t.BestOverlay.Replace('\\', '/'),
        }).ToList();
        var segments = report.Segments.Select(s => s with { BestFrameId = Rename(s.BestFrameId) }).ToList();
        return new RecordingTimeline(report.DurationSeconds, report.FramesScored, report.MinimumFramesSeen, report.TracksFound, report.TracksKept,
            tracks, segments);
    }

    /// <summary>tracks.json read without the sightings (a long recording's bulk), which a manifest line and the review timeline leave out.</summary>
    internal static readonly JsonSerializerOptions ReportInBrief = new(FrameReport.JsonOptions)
    {
        TypeInfoResolver = new System.Text.Json.Serialization.Metadata.DefaultJsonTypeInfoResolver
        {
            Modifiers =
            {
                info =>
                {
                    if (info.Type != typeof(TrackReport)) return;
                    for (int i = info.Properties.Count - 1; i >= 0; i--)
                        if (info.Properties[i].Name == "sightings") info.Properties.RemoveAt(i);
                },
            },
        },
    };

    private static RecordingReport? ReadReport(string path)
    {
        try
        {
            using var file = File.OpenRead(path);
            return JsonSerializer.Deserialize<RecordingReport>(file, ReportInBrief);
        }
        catch (Exception e) when (e is IOException or JsonException or UnauthorizedAccessException) { return null; }
    }

    /// <summary>One line of <c>frames.jsonl</c>; null for a line this version cannot read (written before regions carried tracks).</summary>
    private static RecordingFrameLine? ReadFrameLine(string text)
    {
        try { return JsonSerializer.Deserialize<RecordingFrameLine>(text, Manifest.LineJson); }
        catch (JsonException) { return null; }
    }

    public static bool IsRecordingReport(string reportPath) => reportPath.EndsWith("/" + RecordingRun.TracksFile, StringComparison.Ordinal);
}
