using System.Text.Json.Serialization;

namespace Strayspot.Service.Batches;

public sealed record FrameCounts(
    [property: JsonPropertyName("total")] int Total,
    [property: JsonPropertyName("done")] int Done,
    [property: JsonPropertyName("failed")] int Failed,
    [property: JsonPropertyName("pending")] int Pending);

public sealed record CallbackView(
    [property: JsonPropertyName("url")] string Url,
    [property: JsonPropertyName("state")] string? State,
    [property: JsonPropertyName("attempts")] int Attempts);

/// <summary>A batch as the API shows it, and the body of its completion callback.</summary>
public sealed record BatchView(
    [property: JsonPropertyName("id")] string Id,
    [property: JsonPropertyName("model")] string Model,
    [property: JsonPropertyName("state")] string State,
    [property: JsonPropertyName("source")] string Source,
    [property: JsonPropertyName("created")] DateTimeOffset Created,
    [property: JsonPropertyName("updated")] DateTimeOffset Updated,
    [property: JsonPropertyName("frames")] FrameCounts Frames,
    [property: JsonPropertyName("progress")] double Progress,
    [property: JsonPropertyName("modelSha256")] string? ModelSha256,
    [property: JsonPropertyName("profileVersion")] string? ProfileVersion,
    [property: JsonPropertyName("error")] string? Error,
    [property: JsonPropertyName("callback")] CallbackView? Callback,
    [property: JsonPropertyName("manifest")] string Manifest,
    [property: JsonPropertyName("artifacts")] IReadOnlyList<string> Artifacts)
{
    public static BatchView From(BatchRecord b) => new(
        b.Id, b.Model, b.State, b.Source, b.Created, b.Updated,
        new FrameCounts(b.FrameCount, b.DoneCount, b.FailedCount, b.PendingCount),
        b.FrameCount == 0 ? 1 : Math.Round((double)(b.DoneCount + b.FailedCount) / b.FrameCount, 4),
        b.ModelSha256, b.ProfileVersion, b.Error,
        b.CallbackUrl is null ? null : new CallbackView(b.CallbackUrl, b.CallbackState, b.CallbackAttempts),
        $"/v1/batches/{b.Id}/manifest", b.Artifacts);
}

/// <summary>One frame of a batch as the API shows it.</summary>
public sealed record FrameView(
    [property: JsonPropertyName("seq")] int Seq,
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("source")] string Source,
    [property: JsonPropertyName("state")] string State,
    [property: JsonPropertyName("frameScore")] float? FrameScore,
    [property: JsonPropertyName("regionCount")] int? RegionCount,
    [property: JsonPropertyName("report")] string? Report,
    [property: JsonPropertyName("error")] string? Error,
    [property: JsonPropertyName("scoredAt")] DateTimeOffset? ScoredAt,
    [property: JsonPropertyName("attempts")] int Attempts)
{
    public static FrameView From(FrameRecord f) =>
        new(f.Seq, f.FrameId, f.SourcePath, f.State, f.FrameScore, f.RegionCount, f.ReportPath, f.Error, f.ScoredAt, f.Attempts);
}
