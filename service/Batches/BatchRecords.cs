namespace Strayspot.Service.Batches;

/// <summary>Batch lifecycle: queued → running → done | failed; cancelled from queued or running.</summary>
public static class BatchStates
{
    public const string Queued = "queued";
    public const string Running = "running";
    public const string Done = "done";
    public const string Cancelled = "cancelled";
    public const string Failed = "failed";

    public static bool IsFinished(string state) => state is Done or Cancelled or Failed;
}

public static class FrameStates
{
    public const string Pending = "pending";
    public const string Done = "done";
    public const string Failed = "failed";
}

public static class CallbackStates
{
    public const string Pending = "pending";
    public const string Delivered = "delivered";
    public const string Failed = "failed";
}

public sealed record BatchRecord(
    string Id,
    string Model,
    string State,
    string Source,
    DateTimeOffset Created,
    DateTimeOffset Updated,
    int FrameCount,
    int DoneCount,
    int FailedCount,
    string? CallbackUrl,
    string? CallbackState,
    int CallbackAttempts,
    string? ModelSha256,
    string? ProfileVersion,
    string? Error,
    string? StoredArtifacts = null)
{
    public int PendingCount => FrameCount - DoneCount - FailedCount;

    /// <summary>The artifacts each frame gets (every one for a batch from before they were chosen).</summary>
    public IReadOnlyList<string> Artifacts => Rendering.ArtifactChoice.Read(StoredArtifacts);
}

/// <summary>One frame of a batch. <see cref="Seq"/> orders frames and names their output folder.</summary>
public sealed record FrameRecord(
    string BatchId,
    int Seq,
    string FrameId,
    string SourcePath,
    string State,
    float? FrameScore,
    int? RegionCount,
    string? ReportPath,
    string? RegionsJson,
    string? Error,
    DateTimeOffset? ScoredAt,
    int Attempts);

/// <summary>A frame to add: its client id and the file it is read from.</summary>
public sealed record NewFrame(string FrameId, string SourcePath);

/// <summary>What a finished frame left: the summary stored with its done mark.</summary>
public sealed record FrameResult(float FrameScore, int RegionCount, string ReportPath, string RegionsJson);

/// <summary>A frame as a listing needs it.</summary>
public sealed record FrameSummary(int Seq, string FrameId, string State, float? FrameScore, int? RegionCount);

/// <summary>One region of a scored frame, as far as counting needs it.</summary>
public sealed record RegionBrief(int Seq, int Region, string ClassBeneathName, float MaxScore);
