using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Recordings;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Batches;

/// <summary>
/// Recordings inside batches: a video file in a submitted folder or archive is one work item, scored whole into its
/// folder (<c>tracks.json</c>, <c>frames.jsonl</c> with each sampled frame's timestamp, the plot and the tracks' best
/// frames). Its manifest line carries the kept tracks where a frame's line carries regions, so a decision on region N
/// of that line is a decision on track N.
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
            tracks.Add(new ManifestRegion(t.Id, t.BestBox, t.Sightings.Count, t.MeanScore, t.MaxScore,
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

    public static bool IsRecordingReport(string reportPath) => reportPath.EndsWith("/" + RecordingRun.TracksFile, StringComparison.Ordinal);
}
