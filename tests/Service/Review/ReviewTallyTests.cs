using Strayspot.Service.Batches;
using Strayspot.Service.Reports;
using Strayspot.Service.Review;

namespace Strayspot.Tests.Service.Review;

public class ReviewTallyTests
{
    private static ManifestRegion Region(int id, string beneath, float maxScore) =>
        new(id, new BoxReport(0, 0, 1, 1), 1, maxScore - 1, maxScore, 0, beneath, true, [[0, 0]]);

    private static FrameRecord Frame(int seq, string state, params ManifestRegion[] regions) =>
        new("b", seq, $"f{seq}.png", $"f{seq}.png", state, state == FrameStates.Done ? 3f : null, regions.Length, $"frames/{seq:D5}/report.json",
            Manifest.RegionsJson(regions), null, null, 1);

    private static ReviewCounts Count(FrameRecord[] frames, Decision[] decisions)
    {
        // As the store keeps them: the regions of done frames only.
        var briefs = new List<RegionBrief>();
        foreach (var f in frames)
            if (f.State == FrameStates.Done)
                foreach (var r in Manifest.ReadRegions(f.RegionsJson)) briefs.Add(new RegionBrief(f.Seq, r.Id, r.IndexedClass, r.MaxScore));
        return ReviewTally.Count(frames.Select(f => new FrameSummary(f.Seq, f.FrameId, f.State, f.FrameScore, f.RegionCount)).ToList(), briefs, decisions);
    }

    private static Decision D(int seq, int? region, string verdict) => new(seq, $"f{seq}.png", region, verdict, null, null, DateTimeOffset.UnixEpoch, 1);

    [Fact]
    public void Counts_by_class_beneath_with_frame_verdicts_standing_in_for_undecided_regions()
    {
        // Worked by hand: tarmac has 4 regions, 3 reviewed (1 label-it at 5.0, 2 false alarms at 3.0 and 3.5) → rate 2/3;
        // grass has 2 regions, both false alarms through their frame's verdict (scores 2.0, 2.5) → rate 1.
        var frames = new[]
        {
            Frame(1, FrameStates.Done, Region(1, "tarmac", 5.0f), Region(2, "tarmac", 3.0f), Region(3, "tarmac", 9.0f)),
            Frame(2, FrameStates.Done, Region(1, "grass", 2.0f), Region(2, "grass", 2.5f), Region(3, "tarmac", 3.5f)),
            Frame(3, FrameStates.Done),
            Frame(4, FrameStates.Failed),
            Frame(5, FrameStates.Pending),
        };
        var decisions = new[]
        {
            D(1, 1, Verdicts.LabelIt), D(1, 2, Verdicts.FalseAlarm),
            D(2, null, Verdicts.FalseAlarm),
            D(3, null, Verdicts.Unsure),
        };
        var c = Count(frames, decisions);

        // Reviewed: frame 2 and frame 3 (frame verdicts). Frame 1 has 2 of its 3 regions decided: in progress, not reviewed.
        Assert.Equal(new TargetCounts(3, 2, new VerdictCounts(0, 1, 1), InProgress: 1), c.Frames);
        Assert.Equal(6, c.Regions.Total);
        Assert.Equal(5, c.Regions.Reviewed);
        Assert.Equal(new VerdictCounts(1, 4, 0), c.Regions.Verdicts);

        var tarmac = c.ByClassBeneath.Single(x => x.ClassBeneathName == "tarmac");
        Assert.Equal(4, tarmac.Regions);
        Assert.Equal(3, tarmac.Reviewed);
        Assert.Equal(0.6667, tarmac.FalseAlarmRate);
        Assert.Equal(3.5f, tarmac.HighestFalseAlarmScore);
        Assert.Equal(5.0f, tarmac.LowestLabelItScore);
        var grass = c.ByClassBeneath.Single(x => x.ClassBeneathName == "grass");
        Assert.Equal(1.0, grass.FalseAlarmRate);
        Assert.Null(grass.LowestLabelItScore);
        Assert.Equal("tarmac", c.ByClassBeneath[0].ClassBeneathName); // most reviewed first
    }

    [Fact]
    public void A_frame_is_reviewed_once_every_region_is_decided_or_the_whole_frame_is()
    {
        var frames = new[]
        {
            Frame(1, FrameStates.Done, Region(1, "tarmac", 4f), Region(2, "tarmac", 6f)),
            Frame(2, FrameStates.Done, Region(1, "tarmac", 4f), Region(2, "tarmac", 6f)),
            Frame(3, FrameStates.Done),
        };
        var partly = Count(frames, [D(1, 2, Verdicts.LabelIt)]);
        Assert.Equal(0, partly.Frames.Reviewed);
        Assert.Equal(1, partly.Frames.InProgress);
        var done = Count(frames, [D(1, 2, Verdicts.LabelIt), D(1, 1, Verdicts.FalseAlarm), D(2, null, Verdicts.Unsure)]);
        Assert.Equal(2, done.Frames.Reviewed);
        Assert.Equal(0, done.Frames.InProgress);
        // A frame without regions has nothing to decide region by region: it is reviewed by a frame verdict only.
        Assert.Equal(3, Count(frames, [D(1, 2, Verdicts.LabelIt), D(1, 1, Verdicts.FalseAlarm), D(2, null, Verdicts.Unsure), D(3, null, Verdicts.FalseAlarm)]).Frames.Reviewed);
    }

    [Fact]
    public void A_region_verdict_overrides_its_frame_verdict_and_nothing_reviewed_has_no_rate()
    {
        var frames = new[] { Frame(1, FrameStates.Done, Region(1, "tarmac", 4f), Region(2, "tarmac", 6f)) };
        var c = Count(frames, [D(1, null, Verdicts.FalseAlarm), D(1, 2, Verdicts.LabelIt)]);
        Assert.Equal(new VerdictCounts(1, 1, 0), c.Regions.Verdicts);
        Assert.Equal(0.5, c.ByClassBeneath[0].FalseAlarmRate);

        var none = Count(frames, []);
        Assert.Equal(0, none.Frames.InProgress);
        Assert.Equal(0, none.Frames.Reviewed);
        Assert.Null(none.ByClassBeneath[0].FalseAlarmRate);
    }
}
