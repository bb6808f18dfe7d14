using System.Buffers;
using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Service.Batches;
using Strayspot.Service.Recordings;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Review;

/// <summary>One kept track as the review page draws it on the timeline: its span, facts, best frame and decisions.</summary>
public sealed record ReviewTrack(
    [property: JsonPropertyName("id")] int Id,
    [property: JsonPropertyName("firstTime")] double FirstTime,
    [property: JsonPropertyName("lastTime")] double LastTime,
    [property: JsonPropertyName("framesSeen")] int FramesSeen,
    [property: JsonPropertyName("maxScore")] float MaxScore,
    [property: JsonPropertyName("meanScore")] float MeanScore,
    [property: JsonPropertyName("classBeneath")] int ClassBeneath,
    [property: JsonPropertyName("classBeneathName")] string ClassBeneathName,
    [property: JsonPropertyName("bestFrameId")] string BestFrameId,
    [property: JsonPropertyName("bestTime")] double BestTime,
    [property: JsonPropertyName("bestBox")] BoxReport BestBox,
    [property: JsonPropertyName("best")] string Best,
    [property: JsonPropertyName("decision")] Decision? Decision,
    [property: JsonPropertyName("regionDecision")] Decision? RegionDecision);

/// <summary>
/// A recording of a batch laid out for the timeline: its sampled frames' times and frame scores (at most
/// <see cref="BatchReview.MaxTimelinePoints"/>, each the highest of its stretch when there are more), the threshold,
/// its kept tracks and the time segments ranked for labeling.
/// </summary>
public sealed record ReviewRecording(
    [property: JsonPropertyName("seq")] int Seq,
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("source")] string Source,
    [property: JsonPropertyName("width")] int Width,
    [property: JsonPropertyName("height")] int Height,
    [property: JsonPropertyName("sampling")] string Sampling,
    [property: JsonPropertyName("framesScored")] int FramesScored,
    [property: JsonPropertyName("startSeconds")] double StartSeconds,
    [property: JsonPropertyName("endSeconds")] double EndSeconds,
    [property: JsonPropertyName("threshold")] float Threshold,
    [property: JsonPropertyName("times")] IReadOnlyList<double> Times,
    [property: JsonPropertyName("scores")] IReadOnlyList<float?> Scores,
    [property: JsonPropertyName("pointsMerged")] bool PointsMerged,
    [property: JsonPropertyName("tracksFound")] int TracksFound,
    [property: JsonPropertyName("minimumFramesSeen")] int MinimumFramesSeen,
    [property: JsonPropertyName("tracks")] IReadOnlyList<ReviewTrack> Tracks,
    [property: JsonPropertyName("segments")] IReadOnlyList<TimeSegment> Segments,
    [property: JsonPropertyName("decision")] Decision? Decision);

public sealed partial class BatchReview
{
    /// <summary>Enough points for a strip a screen wide; a long recording's frames are merged into stretches beyond it.</summary>
    public const int MaxTimelinePoints = 2000;

    /// <summary>The recording <paramref name="seq"/> of a batch for its timeline; 409 <c>not-a-recording</c> for a still frame.</summary>
    public ReviewRecording Recording(string id, int seq)
    {
        var batch = Batch(id);
        var frame = RecordingFrame(batch, seq);
        string folder = RecordingFolder(batch, frame);
        var report = ReadRecordingReport(folder, seq);
        var (times, scores, merged) = Timeline(Path.Combine(folder, RecordingRun.FramesFile));
        var own = batches.Decisions.Current(id, seq);
        var byRegion = own.Where(d => d.Region is not null).ToDictionary(d => d.Region!.Value);
        var byTrack = batches.Decisions.CurrentTracks(id, seq).ToDictionary(d => d.Track!.Value);
        var tracks = new List<ReviewTrack>();
        foreach (var t in report.Tracks)
        {
            if (!t.Kept) continue;
            tracks.Add(new ReviewTrack(t.Id, t.FirstTime, t.LastTime, t.FramesSeen, t.MaxScore, t.MeanScore,
                t.ClassBeneath, t.ClassBeneathName ?? t.ClassBeneath.ToString(System.Globalization.CultureInfo.InvariantCulture), t.BestFrameId, t.BestTime, t.BestBox,
                $"/v1/batches/{id}/frames/{seq}/tracks/{t.Id}/best", byTrack.GetValueOrDefault(t.Id), byRegion.GetValueOrDefault(t.Id)));
        }
        double start = times.Count > 0 ? times[0] : 0, end = times.Count > 0 ? times[^1] : 0;
        return new ReviewRecording(seq, frame.FrameId, frame.SourcePath, report.Frame.Width, report.Frame.Height, report.Sampling, report.FramesScored,
            start, end, report.Threshold, times, scores, merged, report.TracksFound, report.MinimumFramesSeen, tracks, report.Segments,
            own.FirstOrDefault(d => d.Region is null));
    }

    /// <summary>The best frame of a kept track with its overlay (a PNG written while the recording was scored).</summary>
    public string TrackImage(string id, int seq, int track)
    {
        var batch = Batch(id);
        var frame = RecordingFrame(batch, seq);
        CheckTrack(batch, frame, track);
        string path = Path.Combine(RecordingFolder(batch, frame), RecordingRun.TracksFolder, RecordingRun.OverlayName(track));
        if (!File.Exists(path))
            throw new ReviewException(Api.ErrorCodes.ArtifactNotFound, $"The best frame of track {track} of recording {seq} is no longer on disk.");
        return path;
    }

    /// <summary>Stores a decision on a whole kept track; it lands on the track's regions in the manifest (see <see cref="TrackDecisions"/>).</summary>
    public Decision DecideTrack(string id, int seq, int track, string? verdict, string? note, string? decidedBy)
    {
        note = CheckVerdict(verdict, note);
        var batch = Batch(id);
        CheckTrack(batch, RecordingFrame(batch, seq), track);
        return batches.Decisions.DecideTrack(id, seq, track, verdict!, note, decidedBy);
    }

    /// <summary>Withdraws the decision on a track; false when it had none.</summary>
    public bool WithdrawTrack(string id, int seq, int track, string? decidedBy)
    {
        var batch = Batch(id);
        CheckTrack(batch, RecordingFrame(batch, seq), track);
        return batches.Decisions.WithdrawTrack(id, seq, track, decidedBy);
    }

    private FrameRecord RecordingFrame(BatchRecord batch, int seq)
    {
        var frame = ScoredFrame(batch, seq);
        if (!BatchRecordings.IsRecordingReport(frame.ReportPath!))
            throw new ReviewException(Api.ErrorCodes.NotARecording,
                $"Frame {seq} of batch '{batch.Id}' ('{frame.FrameId}') is a still frame, not a recording: it has regions, not tracks.");
        return frame;
    }

    private void CheckTrack(BatchRecord batch, FrameRecord frame, int track)
    {
        var kept = Manifest.ReadRegions(frame.RegionsJson).Select(r => r.Id).ToList();
        if (kept.Contains(track)) return;
        var found = ReadRecordingReport(RecordingFolder(batch, frame), frame.Seq).Tracks.FirstOrDefault(t => t.Id == track);
        string which = kept.Count == 0 ? "it kept no track" : $"its kept tracks are {string.Join(", ", kept.Take(20))}{(kept.Count > 20 ? ", …" : "")}";
        throw new ReviewException(Api.ErrorCodes.TrackNotFound, found is not null
            ? $"Track {track} of recording {frame.Seq} was seen in {found.FramesSeen} sampled frame(s) and left out by the persistence rule; {which}."
            : $"Recording {frame.Seq} of batch '{batch.Id}' has no track {track}; {which}.");
    }

    private string RecordingFolder(BatchRecord batch, FrameRecord frame) =>
        Path.Combine(batches.BatchFolder(batch.Id), Path.GetDirectoryName(frame.ReportPath!)!);

    private static RecordingReport ReadRecordingReport(string folder, int seq)
    {
        try
        {
            using var stream = File.OpenRead(Path.Combine(folder, RecordingRun.TracksFile));
            return JsonSerializer.Deserialize<RecordingReport>(stream, BatchRecordings.ReportInBrief)
                   ?? throw new JsonException("empty");
        }
        catch (Exception e) when (e is IOException or JsonException or UnauthorizedAccessException)
        {
            throw new ReviewException(Api.ErrorCodes.ArtifactNotFound, $"The tracks of recording {seq} ({RecordingRun.TracksFile}) cannot be read from the batch folder.");
        }
    }

    /// <summary>
    /// Times and frame scores of the sampled frames, read line by line so a long recording is never held whole; past
    /// <see cref="MaxTimelinePoints"/> they are merged into equal runs of frames, each kept as its highest score (a
    /// short peak must stay visible on the strip). A line that cannot be read is left out, as the manifest leaves it.
    /// </summary>
    public static (List<double> Times, List<float?> Scores, bool Merged) Timeline(string framesPath)
    {
        var times = new List<double>();
        var scores = new List<float?>();
        if (!File.Exists(framesPath)) return (times, scores, false);
        TimelineLines.Read(framesPath, times, scores);
        if (times.Count <= MaxTimelinePoints) return (times, scores, false);
        int run = (times.Count + MaxTimelinePoints - 1) / MaxTimelinePoints;
        var mt = new List<double>(MaxTimelinePoints);
        var ms = new List<float?>(MaxTimelinePoints);
        for (int i = 0; i < times.Count; i += run)
        {
            int top = i;
            for (int j = i + 1; j < Math.Min(i + run, times.Count); j++)
                if ((scores[j] ?? float.NegativeInfinity) > (scores[top] ?? float.NegativeInfinity)) top = j;
            mt.Add(times[top]);
            ms.Add(scores[top]);
        }
        return (mt, ms, true);
    }
}

/// <summary>
/// Reads <c>frames.jsonl</c> for the strip: only each line's <c>timeSeconds</c> and <c>frameScore</c>. The bytes are
/// tokenized in place and everything else (regions, outlines) is stepped over without being built, so a line costs
/// one pass of the tokenizer instead of a text decode plus a parsed document.
/// </summary>
internal static class TimelineLines
{
    public static void Read(string path, List<double> times, List<float?> scores)
    {
        byte[] buffer = ArrayPool<byte>.Shared.Rent(1 << 16);
        try
        {
            using var file = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.ReadWrite, 1, FileOptions.SequentialScan);
            int filled = 0;
            bool first = true;
            while (true)
            {
                int read = file.Read(buffer, filled, buffer.Length - filled);
                filled += read;
                int start = 0;
                if (first && filled >= 3 && buffer.AsSpan(0, 3).SequenceEqual("\uFEFF"u8)) start = 3;
                if (first && (filled >= 3 || read == 0)) first = false;
                while (true)
                {
                    int end = buffer.AsSpan(start, filled - start).IndexOfAny((byte)'\n', (byte)'\r');
                    if (end < 0) break;
                    Line(buffer.AsSpan(start, end), times, scores);
                    start += end + 1;
                }
                if (read == 0)
                {
                    Line(buffer.AsSpan(start, filled - start), times, scores);
                    return;
                }
                // Keep the unfinished line at the front; a line longer than the buffer grows it.
                filled -= start;
                Buffer.BlockCopy(buffer, start, buffer, 0, filled);
                if (filled == buffer.Length)
                {
                    byte[] bigger = ArrayPool<byte>.Shared.Rent(buffer.Length * 2);
                    Buffer.BlockCopy(buffer, 0, bigger, 0, filled);
                    ArrayPool<byte>.Shared.Return(buffer);
                    buffer = bigger;
                }
            }
        }
        finally
        {
            ArrayPool<byte>.Shared.Return(buffer);
        }
    }

    private static void Line(ReadOnlySpan<byte> line, List<double> times, List<float?> scores)
    {
        if (line.IsEmpty) return;
        try
        {
            if (TimeAndScore(line) is var (t, s))
            {
                times.Add(t);
                scores.Add(s);
            }
        }
        catch (Exception e) when (e is JsonException or InvalidOperationException or FormatException) { }
    }

    /// <summary>
    /// The line's time and finite frame score (null when absent, not a number or not finite); null when the line has no
    /// time. As a parsed document reads it (a repeated name's last value counts), but once both are read the rest of
    /// the line, a frame's regions and outlines, is only searched for the two names (plain or escaped): when neither
    /// can be there it is not tokenized at all. So a line torn after its score still gives its point.
    /// </summary>
    internal static (double Time, float? Score)? TimeAndScore(ReadOnlySpan<byte> line)
    {
        var reader = new Utf8JsonReader(line, isFinalBlock: true, state: default);
        if (!reader.Read() || reader.TokenType != JsonTokenType.StartObject) return null;
        double? time = null;
        float? score = null;
        bool scoreRead = false;
        while (reader.Read() && reader.TokenType == JsonTokenType.PropertyName)
        {
            bool isTime = reader.ValueTextEquals("timeSeconds"u8), isScore = !isTime && reader.ValueTextEquals("frameScore"u8);
            reader.Read();
            if (isTime) time = reader.GetDouble();
            else if (isScore) (score, scoreRead) = (reader.TokenType == JsonTokenType.Number ? reader.GetSingle() : null, true);
            else reader.Skip();
            if (time is not null && scoreRead && NeitherNameIn(line[(int)reader.BytesConsumed..])) break;
        }
        return time is double tv ? (tv, score is float v && float.IsFinite(v) ? v : null) : null;
    }

    private static bool NeitherNameIn(ReadOnlySpan<byte> rest) =>
        rest.IndexOf("\"timeSeconds\""u8) < 0 && rest.IndexOf("\"frameScore\""u8) < 0 && rest.IndexOf("\\u"u8) < 0;
}
