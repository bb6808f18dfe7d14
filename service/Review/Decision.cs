using System.Text.Json.Serialization;

namespace Strayspot.Service.Review;

/// <summary>What a reviewer said of a region or of a whole frame.</summary>
public static class Verdicts
{
    /// <summary>Worth sending to labeling.</summary>
    public const string LabelIt = "label-it";
    /// <summary>Nothing unknown there: the detector was wrong.</summary>
    public const string FalseAlarm = "false-alarm";
    public const string Unsure = "unsure";

    public static readonly IReadOnlyList<string> All = [LabelIt, FalseAlarm, Unsure];

    public static bool IsKnown(string? verdict) => verdict is LabelIt or FalseAlarm or Unsure;
}

/// <summary>
/// The current decision on one target of a batch: a region (1, 2, ...) or the whole frame (<see cref="Region"/> null).
/// <see cref="Revision"/> grows with every write to the batch's decisions, so a later write always has a higher one.
/// <see cref="Track"/> is set on a decision made on a whole track of a recording (<see cref="Seq"/> is the recording);
/// on a region it names the track whose decision the region carries (see <see cref="TrackDecisions"/>).
/// </summary>
public sealed record Decision(
    [property: JsonPropertyName("seq")] int Seq,
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("region")] int? Region,
    [property: JsonPropertyName("verdict")] string Verdict,
    [property: JsonPropertyName("note")] string? Note,
    [property: JsonPropertyName("decidedBy")] string? DecidedBy,
    [property: JsonPropertyName("decidedAt")] DateTimeOffset DecidedAt,
    [property: JsonPropertyName("revision")] long Revision,
    [property: JsonPropertyName("track"), JsonIgnore(Condition = JsonIgnoreCondition.WhenWritingNull)] int? Track = null);

/// <summary>One write to a batch's decisions, kept for the record; a null verdict means the decision was withdrawn.</summary>
public sealed record DecisionEntry(
    [property: JsonPropertyName("revision")] long Revision,
    [property: JsonPropertyName("seq")] int Seq,
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("region")] int? Region,
    [property: JsonPropertyName("verdict")] string? Verdict,
    [property: JsonPropertyName("note")] string? Note,
    [property: JsonPropertyName("decidedBy")] string? DecidedBy,
    [property: JsonPropertyName("decidedAt")] DateTimeOffset DecidedAt,
    [property: JsonPropertyName("track"), JsonIgnore(Condition = JsonIgnoreCondition.WhenWritingNull)] int? Track = null);

/// <summary>The part of a decision that travels with a manifest line or region; <see cref="Track"/> when it was made on the region's track.</summary>
public sealed record DecisionMark(
    [property: JsonPropertyName("verdict")] string Verdict,
    [property: JsonPropertyName("note")] string? Note,
    [property: JsonPropertyName("decidedBy")] string? DecidedBy,
    [property: JsonPropertyName("decidedAt")] DateTimeOffset DecidedAt,
    [property: JsonPropertyName("track"), JsonIgnore(Condition = JsonIgnoreCondition.WhenWritingNull)] int? Track = null)
{
    public static DecisionMark From(Decision d) => new(d.Verdict, d.Note, d.DecidedBy, d.DecidedAt, d.Track);
}
