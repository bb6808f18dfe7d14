using System.Text.Json.Serialization;
using Strayspot.Scoring.Tracks;
using Strayspot.Service.Batches;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Recordings;

/// <summary>
/// One sampled frame's line in <c>frames.jsonl</c>: where it is in time and what it holds. Its regions have the
/// manifest's shape (outline included) plus the track each joined, so a batch manifest's frame line is this line with
/// the batch's fields added.
/// </summary>
public sealed record RecordingFrameLine(
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("index")] long Index,
    [property: JsonPropertyName("timeSeconds")] double TimeSeconds,
    [property: JsonPropertyName("frameScore")] float FrameScore,
    [property: JsonPropertyName("anomalousShare")] double AnomalousShare,
    [property: JsonPropertyName("regions")] IReadOnlyList<ManifestRegion> Regions);

/// <summary>A track as <c>tracks.json</c> writes it.</summary>
public sealed record TrackReport
{
    [JsonPropertyName("id")] public int Id { get; init; }
    [JsonPropertyName("kept")] public bool Kept { get; init; }
    [JsonPropertyName("firstTime")] public double FirstTime { get; init; }
    [JsonPropertyName("lastTime")] public double LastTime { get; init; }
    [JsonPropertyName("firstFrame")] public long FirstFrame { get; init; }
    [JsonPropertyName("lastFrame")] public long LastFrame { get; init; }
    [JsonPropertyName("framesSeen")] public int FramesSeen { get; init; }
    [JsonPropertyName("maxScore")] public float MaxScore { get; init; }
    [JsonPropertyName("meanScore")] public float MeanScore { get; init; }
    [JsonPropertyName("classBeneath")] public int ClassBeneath { get; init; }
    [JsonPropertyName("classBeneathName")] public string? ClassBeneathName { get; init; }
    [JsonPropertyName("bestFrameId")] public string BestFrameId { get; init; } = "";
    [JsonPropertyName("bestTime")] public double BestTime { get; init; }
    [JsonPropertyName("bestRegion")] public int BestRegion { get; init; }
    [JsonPropertyName("bestBox")] public BoxReport BestBox { get; init; } = new(0, 0, 0, 0);
    [JsonPropertyName("bestOverlay")] public string? BestOverlay { get; init; }
    /// <summary>Every sighting (frame, region, box, score), in time order; null where a summary leaves them out (a manifest's timeline).</summary>
    [JsonPropertyName("sightings")] public IReadOnlyList<SightingReport>? Sightings { get; init; } = [];

    public static TrackReport From(Track t, bool kept, string recording, IReadOnlyList<string>? classNames, string? overlay) => new()
    {
        Id = t.Id, Kept = kept, FirstTime = t.FirstTime, LastTime = t.LastTime, FirstFrame = t.First.FrameIndex, LastFrame = t.Last.FrameIndex,
        FramesSeen = t.FramesSeen, MaxScore = t.MaxScore, MeanScore = t.MeanScore, ClassBeneath = t.ClassBeneath,
        ClassBeneathName = classNames is not null && t.ClassBeneath >= 0 && t.ClassBeneath < classNames.Count ? classNames[t.ClassBeneath] : null,
        BestFrameId = RecordingFrame.IdOf(recording, t.Best.FrameIndex), BestTime = t.Best.TimeSeconds, BestRegion = t.Best.RegionId,
        BestBox = new BoxReport(t.Best.Left, t.Best.Top, t.Best.Width, t.Best.Height), BestOverlay = overlay,
        Sightings = t.Sightings.Select(s => new SightingReport(RecordingFrame.IdOf(recording, s.FrameIndex), s.FrameIndex, s.TimeSeconds, s.RegionId,
            new BoxReport(s.Left, s.Top, s.Width, s.Height), s.MaxScore)).ToList(),
    };
}

public sealed record SightingReport(
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("index")] long Index,
    [property: JsonPropertyName("timeSeconds")] double TimeSeconds,
    [property: JsonPropertyName("region")] int Region,
    [property: JsonPropertyName("box")] BoxReport Box,
    [property: JsonPropertyName("maxScore")] float MaxScore);

/// <summary>A stretch of time worth labelling: kept tracks whose spans overlap or nearly meet, merged.</summary>
public sealed record TimeSegment(
    [property: JsonPropertyName("rank")] int Rank,
    [property: JsonPropertyName("startSeconds")] double StartSeconds,
    [property: JsonPropertyName("endSeconds")] double EndSeconds,
    [property: JsonPropertyName("maxScore")] float MaxScore,
    [property: JsonPropertyName("tracks")] IReadOnlyList<int> Tracks,
    [property: JsonPropertyName("bestFrameId")] string BestFrameId);

/// <summary><c>tracks.json</c>: the recording, how it was read and linked, and its tracks and segments.</summary>
public sealed record RecordingReport
{
    [JsonPropertyName("recording")] public string Recording { get; init; } = "";
    [JsonPropertyName("source")] public string Source { get; init; } = "";
    [JsonPropertyName("frame")] public SizeReport Frame { get; init; } = new(0, 0);
    [JsonPropertyName("sampling")] public string Sampling { get; init; } = "";
    [JsonPropertyName("framesScored")] public int FramesScored { get; init; }
    [JsonPropertyName("durationSeconds")] public double DurationSeconds { get; init; }
    [JsonPropertyName("threshold")] public float Threshold { get; init; }
    [JsonPropertyName("linking")] public TrackLinkOptions Linking { get; init; } = new();
    [JsonPropertyName("minimumFramesSeen")] public int MinimumFramesSeen { get; init; }
    [JsonPropertyName("tracksFound")] public int TracksFound { get; init; }
    [JsonPropertyName("tracksKept")] public int TracksKept { get; init; }
    [JsonPropertyName("tracks")] public IReadOnlyList<TrackReport> Tracks { get; init; } = [];
    [JsonPropertyName("segments")] public IReadOnlyList<TimeSegment> Segments { get; init; } = [];
    [JsonPropertyName("notes")] public IReadOnlyList<string> Notes { get; init; } = [];
    /// <summary>The frame runner's warnings (one frame size and one set of options per recording, so one list for all frames).</summary>
    [JsonPropertyName("warnings")] public IReadOnlyList<ReportWarning> Warnings { get; init; } = [];
    [JsonPropertyName("timingsMs")] public Dictionary<string, double> TimingsMs { get; init; } = new();
    [JsonPropertyName("notice")] public string Notice { get; init; } = SafetyNotice.Text;
}
