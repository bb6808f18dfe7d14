using System.Text.Json.Serialization;
using Strayspot.Service.Batches;

namespace Strayspot.Service.Review;

public sealed record VerdictCounts(
    [property: JsonPropertyName("labelIt")] int LabelIt,
    [property: JsonPropertyName("falseAlarm")] int FalseAlarm,
    [property: JsonPropertyName("unsure")] int Unsure)
{
    public int Total => LabelIt + FalseAlarm + Unsure;
}

/// <summary>
/// How far a kind of target is reviewed. For frames, <see cref="InProgress"/> counts those with some regions decided
/// but neither all of them nor the whole frame; it is left out for regions.
/// </summary>
public sealed record TargetCounts(
    [property: JsonPropertyName("total")] int Total,
    [property: JsonPropertyName("reviewed")] int Reviewed,
    [property: JsonPropertyName("verdicts")] VerdictCounts Verdicts,
    [property: JsonPropertyName("inProgress"), JsonIgnore(Condition = JsonIgnoreCondition.WhenWritingNull)] int? InProgress = null);

/// <summary>
/// Reviewed regions standing on one class. <see cref="FalseAlarmRate"/> is false alarms over reviewed regions;
/// the two score bounds show where a threshold would part the reviewed false alarms from the regions worth labeling.
/// </summary>
public sealed record ClassTally(
    [property: JsonPropertyName("classBeneathName")] string ClassBeneathName,
    [property: JsonPropertyName("regions")] int Regions,
    [property: JsonPropertyName("reviewed")] int Reviewed,
    [property: JsonPropertyName("verdicts")] VerdictCounts Verdicts,
    [property: JsonPropertyName("falseAlarmRate")] double? FalseAlarmRate,
    [property: JsonPropertyName("highestFalseAlarmScore")] float? HighestFalseAlarmScore,
    [property: JsonPropertyName("lowestLabelItScore")] float? LowestLabelItScore)
{
    /// <summary>The class's index in the model (null when the batch's model no longer names it).</summary>
    [JsonPropertyName("classBeneath")] public int? ClassBeneath { get; init; }
}

public sealed record ReviewCounts(
    [property: JsonPropertyName("frames")] TargetCounts Frames,
    [property: JsonPropertyName("regions")] TargetCounts Regions,
    [property: JsonPropertyName("byClassBeneath")] IReadOnlyList<ClassTally> ByClassBeneath);

/// <summary>
/// Counts a batch's decisions. A frame counts as reviewed when the whole frame has a verdict or every one of its
/// regions has one (a frame without regions needs a frame verdict); with only some regions decided it is in progress. A region
/// without a decision of its own takes its frame's verdict, so marking a whole frame a false alarm counts each of
/// its regions as one.
/// </summary>
public static class ReviewTally
{
    /// <param name="frames">The batch's frames (only done ones count).</param>
    /// <param name="regions">The regions of the done frames.</param>
    /// <param name="classNames">The model's class names, to give each tally its class index.</param>
    public static ReviewCounts Count(IReadOnlyList<FrameSummary> frames, IReadOnlyList<RegionBrief> regions, IReadOnlyList<Decision> decisions,
        IReadOnlyList<string>? classNames = null)
    {
        var byTarget = new Dictionary<(int Seq, int? Region), string>();
        foreach (var d in decisions) byTarget[(d.Seq, d.Region)] = d.Verdict;
        int frameTotal = 0, frameLabel = 0, frameFalse = 0, frameUnsure = 0;
        int regionTotal = 0, regionLabel = 0, regionFalse = 0, regionUnsure = 0;
        var classes = new Dictionary<string, Tally>(StringComparer.Ordinal);
        var frameVerdicts = new Dictionary<int, string?>();
        foreach (var f in frames)
        {
            if (f.State != FrameStates.Done) continue;
            frameTotal++;
            string? frameVerdict = byTarget.GetValueOrDefault((f.Seq, null));
            frameVerdicts[f.Seq] = frameVerdict;
            Bump(frameVerdict, ref frameLabel, ref frameFalse, ref frameUnsure);
        }
        foreach (var r in regions)
        {
            if (!frameVerdicts.TryGetValue(r.Seq, out string? frameVerdict)) continue;
            regionTotal++;
            string? verdict = byTarget.GetValueOrDefault((r.Seq, r.Region)) ?? frameVerdict;
            Bump(verdict, ref regionLabel, ref regionFalse, ref regionUnsure);
            if (!classes.TryGetValue(r.ClassBeneathName, out var t)) classes[r.ClassBeneathName] = t = new Tally();
            t.Add(verdict, r.MaxScore);
        }
        var regionsDecided = new Dictionary<int, int>();
        foreach (var r in regions)
            if (byTarget.ContainsKey((r.Seq, r.Region))) regionsDecided[r.Seq] = regionsDecided.GetValueOrDefault(r.Seq) + 1;
        int framesReviewed = 0, framesInProgress = 0;
        foreach (var f in frames)
        {
            if (f.State != FrameStates.Done) continue;
            int decided = regionsDecided.GetValueOrDefault(f.Seq), count = f.RegionCount ?? 0;
            if (frameVerdicts[f.Seq] is not null || (count > 0 && decided >= count)) framesReviewed++;
            else if (decided > 0) framesInProgress++;
        }
        var byClass = classes
            .Select(kv => kv.Value.ToTally(kv.Key) with { ClassBeneath = IndexOf(classNames, kv.Key) })
            .OrderByDescending(c => c.Reviewed).ThenByDescending(c => c.Regions).ThenBy(c => c.ClassBeneathName, StringComparer.Ordinal)
            .ToList();
        return new ReviewCounts(
            new TargetCounts(frameTotal, framesReviewed, new VerdictCounts(frameLabel, frameFalse, frameUnsure), framesInProgress),
            new TargetCounts(regionTotal, regionLabel + regionFalse + regionUnsure, new VerdictCounts(regionLabel, regionFalse, regionUnsure)),
            byClass);
    }

    private static int? IndexOf(IReadOnlyList<string>? names, string name)
    {
        for (int i = 0; i < (names?.Count ?? 0); i++)
            if (names![i] == name) return i;
        return null;
    }

    private static void Bump(string? verdict, ref int label, ref int falseAlarm, ref int unsure)
    {
        switch (verdict)
        {
            case Verdicts.LabelIt: label++; break;
            case Verdicts.FalseAlarm: falseAlarm++; break;
            case Verdicts.Unsure: unsure++; break;
        }
    }

    private sealed class Tally
    {
        private int _regions, _label, _false, _unsure;
        private float? _highestFalse, _lowestLabel;

        public void Add(string? verdict, float maxScore)
        {
            _regions++;
            Bump(verdict, ref _label, ref _false, ref _unsure);
            if (verdict == Verdicts.FalseAlarm) _highestFalse = Math.Max(_highestFalse ?? float.NegativeInfinity, maxScore);
            if (verdict == Verdicts.LabelIt) _lowestLabel = Math.Min(_lowestLabel ?? float.PositiveInfinity, maxScore);
        }

        public ClassTally ToTally(string name)
        {
            int reviewed = _label + _false + _unsure;
            return new ClassTally(name, _regions, reviewed, new VerdictCounts(_label, _false, _unsure),
                reviewed == 0 ? null : Math.Round((double)_false / reviewed, 4), _highestFalse, _lowestLabel);
        }
    }
}
