using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Service.Batches;
using Strayspot.Service.Evaluation;
using Strayspot.Service.Hosting;
using Strayspot.Service.Inference;
using Strayspot.Service.Recordings;
using Strayspot.Service.Rendering;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Review;

/// <summary>A refused review request; <see cref="Code"/> is an API error code.</summary>
public sealed class ReviewException(string code, string message) : Strayspot.Scoring.CodedException(code, message);

/// <summary>The stable codes of <see cref="ReviewException"/>; never rename one.</summary>
public static class ReviewErrorCodes
{
    public const string FrameNotFound = "frame-not-found";
    public const string FrameNotScored = "frame-not-scored";
    public const string RegionNotFound = "region-not-found";
    public const string NoteTooLong = "note-too-long";
    public const string TrackNotFound = "track-not-found";
    public const string NotARecording = "not-a-recording";
}

public sealed record ReviewClass(
    [property: JsonPropertyName("index")] int Index,
    [property: JsonPropertyName("name")] string Name,
    [property: JsonPropertyName("color")] string Color,
    [property: JsonPropertyName("surface")] bool Surface);

/// <summary>What produced the scores under review: the batch's model, calibration and scoring profile.</summary>
public sealed record ReviewProvenance(
    [property: JsonPropertyName("model")] string Model,
    [property: JsonPropertyName("modelSha256")] string? ModelSha256,
    [property: JsonPropertyName("profileVersion")] string? ProfileVersion,
    [property: JsonPropertyName("currentProfileVersion")] string? CurrentProfileVersion,
    [property: JsonPropertyName("method")] string? Method,
    [property: JsonPropertyName("threshold")] float? Threshold,
    [property: JsonPropertyName("calibration")] CalibrationSummary? Calibration);

/// <summary>One frame in the review list; a recording's regions are its kept tracks.</summary>
public sealed record ReviewFrameItem(
    [property: JsonPropertyName("seq")] int Seq,
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("frameScore")] float? FrameScore,
    [property: JsonPropertyName("regionCount")] int RegionCount,
    [property: JsonPropertyName("regionsDecided")] int RegionsDecided,
    [property: JsonPropertyName("verdict")] string? Verdict,
    [property: JsonPropertyName("recording"), JsonIgnore(Condition = JsonIgnoreCondition.WhenWritingDefault)] bool Recording = false);

public sealed record EvaluationLink(
    [property: JsonPropertyName("id")] string Id,
    [property: JsonPropertyName("finishedUtc")] DateTimeOffset? FinishedUtc,
    [property: JsonPropertyName("report")] string Report);

/// <summary>Everything the review page needs about a batch, in one answer.</summary>
public sealed record ReviewOverview(
    [property: JsonPropertyName("batch")] BatchView Batch,
    [property: JsonPropertyName("provenance")] ReviewProvenance Provenance,
    [property: JsonPropertyName("classes")] IReadOnlyList<ReviewClass> Classes,
    [property: JsonPropertyName("counts")] ReviewCounts Counts,
    [property: JsonPropertyName("evaluation")] EvaluationLink? Evaluation,
    [property: JsonPropertyName("frames")] IReadOnlyList<ReviewFrameItem> Frames,
    [property: JsonPropertyName("notice")] string Notice);

/// <summary>One scored frame of a batch with its regions, their decisions and links to its images.</summary>
public sealed record ReviewFrame(
    [property: JsonPropertyName("seq")] int Seq,
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("source")] string Source,
    [property: JsonPropertyName("frameScore")] float? FrameScore,
    [property: JsonPropertyName("threshold")] float? Threshold,
    [property: JsonPropertyName("scoreRange")] ScoreRange? ScoreRange,
    [property: JsonPropertyName("width")] int Width,
    [property: JsonPropertyName("height")] int Height,
    [property: JsonPropertyName("regions")] IReadOnlyList<ManifestRegion> Regions,
    [property: JsonPropertyName("decision")] Decision? Decision,
    [property: JsonPropertyName("files")] IReadOnlyDictionary<string, string> Files,
    [property: JsonPropertyName("heatScale")] HeatScale? HeatScale = null,
    [property: JsonPropertyName("recording"), JsonIgnore(Condition = JsonIgnoreCondition.WhenWritingNull)] string? Recording = null);

/// <summary>Reviewing a batch: its overview, its frames one by one, and the decisions on them.</summary>
public sealed partial class BatchReview(BatchService batches, ModelCatalog catalog, EvaluationJobs evaluations)
{
    /// <summary>Long enough for a sentence or two of context; a note is not a document store.</summary>
    public const int MaxNoteLength = 2000;

    /// <summary>File names a frame's images are served under: its source, then its artifacts.</summary>
    public static readonly IReadOnlyList<string> FrameFiles = ["source", .. ArtifactWriter.All, "report"];

    public BatchRecord Batch(string id) =>
        (BatchService.IsBatchId(id) ? batches.Store.Get(id) : null)
        ?? throw new ReviewException(Api.ErrorCodes.BatchNotFound, $"There is no batch '{id}'; GET /v1/batches lists them.");

    /// <param name="withFrames">False leaves the frame list out: a page refreshing its counts after a decision needs only those.</param>
    public ReviewOverview Overview(string id, bool withFrames = true)
    {
        var batch = Batch(id);
        var frames = batches.Store.FrameSummaries(id);
        var decisions = batches.Decisions.Effective(id);
        var decided = new Dictionary<int, int>();
        var frameVerdicts = new Dictionary<int, string>();
        foreach (var d in decisions)
        {
            if (d.Region is null) frameVerdicts[d.Seq] = d.Verdict;
            else decided[d.Seq] = decided.GetValueOrDefault(d.Seq) + 1;
        }
        var items = new List<ReviewFrameItem>();
        var ranked = withFrames ? frames.Where(f => f.State == FrameStates.Done) : [];
        foreach (var f in ranked.OrderByDescending(f => f.FrameScore ?? float.NegativeInfinity).ThenBy(f => f.Seq))
            items.Add(new ReviewFrameItem(f.Seq, f.FrameId, f.FrameScore, f.RegionCount ?? 0, decided.GetValueOrDefault(f.Seq),
                frameVerdicts.GetValueOrDefault(f.Seq), Recordings.VideoRecording.IsVideoFile(f.FrameId)));

        catalog.TryGet(batch.Model, out var entry);
        var classes = new List<ReviewClass>();
        if (entry?.Descriptor is { } descriptor)
        {
            var colors = ArtifactWriter.ColorsOf(descriptor);
            var surface = entry.Profile.Effective.SurfaceClasses ?? entry.Profile.DescriptorSurfaceClasses ?? [];
            for (int i = 0; i < descriptor.Classes.Count; i++)
                classes.Add(new ReviewClass(i, descriptor.Classes[i].Name, $"#{colors[i].R:x2}{colors[i].G:x2}{colors[i].B:x2}", surface.Contains(i)));
        }
        var provenance = new ReviewProvenance(batch.Model, batch.ModelSha256, batch.ProfileVersion, entry?.Profile.Version,
            entry?.Profile.Effective.Method.ToString().ToLowerInvariant(), entry?.Profile.Effective.Threshold, entry?.Calibration);
        var evaluation = evaluations.List().FirstOrDefault(j => j.Model == batch.Model && j.State == "done");
        var link = evaluation is null ? null
            : new EvaluationLink(evaluation.Id, evaluation.FinishedUtc, $"/v1/evaluations/{evaluation.Id}/files/{EvaluationOutputs.MarkdownFile}");
        return new ReviewOverview(BatchView.From(batch), provenance, classes, ReviewTally.Count(frames, batches.Store.RegionBriefs(id), decisions, entry?.Descriptor?.Classes.Select(c => c.Name).ToList()), link, items, SafetyNotice.Text);
    }

    public ReviewFrame Frame(string id, int seq)
    {
        var batch = Batch(id);
        var frame = ScoredFrame(batch, seq);
        var regions = Manifest.ReadRegions(frame.RegionsJson);
        Decision? frameDecision = null;
        var byRegion = new Dictionary<int, Decision>();
        foreach (var d in batches.Decisions.Effective(id, seq))
        {
            if (d.Region is int r) byRegion[r] = d;
            else frameDecision = d;
        }
        for (int i = 0; i < regions.Count; i++)
            if (byRegion.TryGetValue(regions[i].Id, out var d)) regions[i] = regions[i] with { Decision = DecisionMark.From(d) };
        if (BatchRecordings.IsRecordingReport(frame.ReportPath!))
        {
            // A recording has no frame images of its own: the page draws its timeline from the recording route.
            RecordingReport? recording = null;
            try { recording = ReadRecordingReport(RecordingFolder(batch, frame), seq); }
            catch (ReviewException) { } // its decisions can still be listed; the recording route says what is missing
            return new ReviewFrame(frame.Seq, frame.FrameId, frame.SourcePath, frame.FrameScore, recording?.Threshold, null,
                recording?.Frame.Width ?? 0, recording?.Frame.Height ?? 0, regions, frameDecision,
                new Dictionary<string, string>(StringComparer.Ordinal) { ["source"] = $"/v1/batches/{id}/frames/{seq}/files/source" },
                Recording: $"/v1/batches/{id}/frames/{seq}/recording");
        }
        var report = ReadReport(batch, frame);
        var (width, height) = report is null ? MaskSize(batch, frame) : (report.Frame.Width, report.Frame.Height);
        // Only the artifacts the batch's frames were given (the batch's artifacts field).
        var files = FrameFiles.Where(f => f is "source" or ArtifactWriter.Report || batch.Artifacts.Contains(f))
            .ToDictionary(f => f, f => $"/v1/batches/{id}/frames/{seq}/files/{f}", StringComparer.Ordinal);
        return new ReviewFrame(frame.Seq, frame.FrameId, frame.SourcePath, frame.FrameScore, report?.Threshold, report?.ScoreRange,
            width, height, regions, frameDecision, files, report?.HeatScale);
    }

    /// <summary>The file behind one of <see cref="FrameFiles"/>: its path and content type.</summary>
    public (string Path, string ContentType) FrameFile(string id, int seq, string name)
    {
        var batch = Batch(id);
        var frame = ScoredFrame(batch, seq);
        if (name == "source")
        {
            string path;
            try { path = batches.ResolveSource(frame.SourcePath); }
            catch (UnsafePathException e) { throw new ReviewException(Api.ErrorCodes.PathOutsideData, e.Message); }
            if (!File.Exists(path))
                throw new ReviewException(Api.ErrorCodes.ArtifactNotFound, $"The source of frame {seq} ('{frame.SourcePath}') is no longer on disk.");
            return (path, ContentTypes.Of(path));
        }
        string folder = Path.Combine(batches.BatchFolder(id), Path.GetDirectoryName(frame.ReportPath!)!);
        string? file = ArtifactWriter.FileOf(name);
        if (file is null)
            throw new ReviewException(Api.ErrorCodes.ArtifactNotFound, $"Frames have no file '{name}'; they have {string.Join(", ", FrameFiles)}.");
        string full = Path.Combine(folder, file);
        if (!File.Exists(full))
            throw new ReviewException(Api.ErrorCodes.ArtifactNotFound, $"Frame {seq} has no '{name}' file on disk.");
        return (full, ContentTypes.Of(full));
    }

    /// <summary>Stores a decision on a region (or, with <paramref name="region"/> null, on the whole frame); last write wins.</summary>
    public Decision Decide(string id, int seq, int? region, string? verdict, string? note, string? decidedBy)
    {
        note = CheckVerdict(verdict, note);
        var batch = Batch(id);
        CheckTarget(batch, seq, region);
        return batches.Decisions.Decide(id, seq, region, verdict!, note, decidedBy);
    }

    /// <summary>Refuses an unknown verdict or a bad note; returns the note as kept (trimmed, null when blank).</summary>
    private static string? CheckVerdict(string? verdict, string? note)
    {
        if (!Verdicts.IsKnown(verdict))
            throw new ReviewException(Api.ErrorCodes.ValidationFailed,
                $"'verdict' must be one of {string.Join(", ", Verdicts.All)}; got {(verdict is null ? "none" : $"'{verdict}'")}.");
        note = string.IsNullOrWhiteSpace(note) ? null : note.Trim();
        if (note is not null && note.Length > MaxNoteLength)
            throw new ReviewException(Api.ErrorCodes.NoteTooLong, $"The note has {note.Length} characters; at most {MaxNoteLength} are kept.");
        if (note is not null && note.Any(c => char.IsControl(c) && c is not ('\n' or '\t')))
            throw new ReviewException(Api.ErrorCodes.ValidationFailed, "The note holds control characters; only text, tabs and line breaks are kept.");
        return note;
    }

    /// <summary>Withdraws a decision; false when the target had none.</summary>
    public bool Withdraw(string id, int seq, int? region, string? decidedBy)
    {
        var batch = Batch(id);
        CheckTarget(batch, seq, region);
        return batches.Decisions.Withdraw(id, seq, region, decidedBy);
    }

    public IReadOnlyList<Decision> Decisions(string id, string? verdict)
    {
        Batch(id);
        if (verdict is not null && !Verdicts.IsKnown(verdict))
            throw new ReviewException(Api.ErrorCodes.ValidationFailed, $"'verdict' must be one of {string.Join(", ", Verdicts.All)}; got '{verdict}'.");
        var all = batches.Decisions.Effective(id);
        return verdict is null ? all : all.Where(d => d.Verdict == verdict).ToList();
    }

    public IReadOnlyList<DecisionEntry> Log(string id, long after, int limit)
    {
        Batch(id);
        return batches.Decisions.Log(id, after, Math.Clamp(limit, 1, 10_000));
    }

    private void CheckTarget(BatchRecord batch, int seq, int? region)
    {
        var frame = ScoredFrame(batch, seq);
        if (region is not int r) return;
        var regions = Manifest.ReadRegions(frame.RegionsJson);
        if (!regions.Any(x => x.Id == r))
            throw new ReviewException(Api.ErrorCodes.RegionNotFound, regions.Count == 0
                ? $"Frame {seq} of batch '{batch.Id}' has no regions; decide on the whole frame instead."
                : $"Frame {seq} of batch '{batch.Id}' has regions 1 to {regions.Count}, not {r}.");
    }

    private FrameRecord ScoredFrame(BatchRecord batch, int seq)
    {
        var frame = batches.Store.Frame(batch.Id, seq)
            ?? throw new ReviewException(Api.ErrorCodes.FrameNotFound, $"Batch '{batch.Id}' has no frame {seq}; GET /v1/batches/{batch.Id}/frames lists them.");
        if (frame.State != FrameStates.Done)
            throw new ReviewException(Api.ErrorCodes.FrameNotScored, frame.State == FrameStates.Failed
                ? $"Frame {seq} could not be scored ({frame.Error}); there is nothing to review."
                : $"Frame {seq} is not scored yet; it can be reviewed once it is.");
        return frame;
    }

    private FrameReport? ReadReport(BatchRecord batch, FrameRecord frame)
    {
        string path = Path.Combine(batches.BatchFolder(batch.Id), frame.ReportPath!);
        try
        {
            using var stream = File.OpenRead(path);
            return JsonSerializer.Deserialize<FrameReport>(stream, FrameReport.JsonOptions);
        }
        catch (Exception e) when (e is IOException or JsonException or UnauthorizedAccessException)
        {
            return null; // the frame can still be shown: its size comes from the mask instead
        }
    }

    /// <summary>The frame's size read from its mask's header, for a frame whose report is unreadable; 0×0 without one.</summary>
    private (int Width, int Height) MaskSize(BatchRecord batch, FrameRecord frame)
    {
        string path = Path.Combine(batches.BatchFolder(batch.Id), Path.GetDirectoryName(frame.ReportPath!)!, ArtifactWriter.Files["mask"]);
        try
        {
            var info = SixLabors.ImageSharp.Image.Identify(path);
            return info is null ? (0, 0) : (info.Width, info.Height);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or SixLabors.ImageSharp.ImageFormatException)
        {
            return (0, 0);
        }
    }
}
