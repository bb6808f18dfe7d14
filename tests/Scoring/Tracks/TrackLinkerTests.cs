using Strayspot.Scoring.Regions;
using Strayspot.Scoring.Tracks;

namespace Strayspot.Tests.Scoring.Tracks;

/// <summary>Hand-worked linking cases: every expected number below is worked out in the comment beside it.</summary>
public class TrackLinkerTests
{
    private const int W = 200, H = 100;

    private static Region Box(int id, int left, int top, int width, int height, float max = 1f, float mean = 0.5f, int cls = 0) =>
        new(id, left, top, width, height, (long)width * height, (double)width * height / (W * H),
            left + (width - 1) / 2.0, top + (height - 1) / 2.0, max, mean, cls, 1.0, true);

    [Fact]
    public void A_box_moving_two_pixels_a_frame_is_one_track()
    {
        // 10×10 boxes 2 px apart: intersection 8·10 = 80, union 100 + 100 − 80 = 120, overlap 0.667 ≥ 0.1.
        var linker = new TrackLinker();
        for (int i = 0; i < 5; i++)
            linker.Add(i, frameIndex: 10 * i, timeSeconds: 0.4 * i, W, H, [Box(1, 20 + 2 * i, 30, 10, 10, max: 1 + i)]);
        var t = Assert.Single(linker.Tracks());
        Assert.Equal(5, t.FramesSeen);
        Assert.Equal(0.0, t.FirstTime);
        Assert.Equal(1.6, t.LastTime, 9);
        Assert.Equal(5f, t.MaxScore);
        Assert.Equal(40, t.Best.FrameIndex); // the highest region score, 5, is in the last frame
        Assert.Equal(0.5f, t.MeanScore);
    }

    [Fact]
    public void One_missed_frame_is_bridged_by_default_and_splits_the_track_with_no_tolerance()
    {
        // Seen in samples 0, 1 and 3: a gap of one sampled frame.
        static IReadOnlyList<Track> Link(int missed)
        {
            var linker = new TrackLinker(new TrackLinkOptions { MissedFrames = missed });
            linker.Add(0, 0, 0.0, W, H, [Box(1, 50, 50, 10, 10)]);
            linker.Add(1, 1, 0.1, W, H, [Box(1, 51, 50, 10, 10)]);
            linker.Add(2, 2, 0.2, W, H, []);
            linker.Add(3, 3, 0.3, W, H, [Box(1, 53, 50, 10, 10)]);
            return linker.Tracks();
        }
        var bridged = Assert.Single(Link(1));
        Assert.Equal(3, bridged.FramesSeen);
        Assert.Equal(0.3, bridged.LastTime, 9);
        var split = Link(0);
        Assert.Equal(2, split.Count);
        Assert.Equal(2, split[0].FramesSeen);
        Assert.Equal(1, split[1].FramesSeen);
        Assert.Equal(3, split[1].First.Sample);
    }

    [Fact]
    public void Two_gaps_exceed_a_tolerance_of_one()
    {
        var linker = new TrackLinker();
        linker.Add(0, 0, 0, W, H, [Box(1, 50, 50, 10, 10)]);
        linker.Add(3, 3, 0.3, W, H, [Box(1, 50, 50, 10, 10)]); // samples 1 and 2 missing: 2 > 1
        Assert.Equal(2, linker.Tracks().Count);
    }

    [Fact]
    public void Disjoint_boxes_link_by_centroid_within_the_stated_share_of_the_diagonal()
    {
        // Diagonal of 200×100 is √50000 = 223.6; 5 % of it is 11.18 px. 4×4 boxes 6 px apart do not overlap,
        // and their centroids are 6 px apart: linked. 13 px apart: not linked.
        var near = new TrackLinker();
        near.Add(0, 0, 0, W, H, [Box(1, 100, 40, 4, 4)]);
        near.Add(1, 1, 1, W, H, [Box(1, 106, 40, 4, 4)]);
        Assert.Single(near.Tracks());
        var far = new TrackLinker();
        far.Add(0, 0, 0, W, H, [Box(1, 100, 40, 4, 4)]);
        far.Add(1, 1, 1, W, H, [Box(1, 113, 40, 4, 4)]);
        Assert.Equal(2, far.Tracks().Count);
    }

    [Fact]
    public void Matching_is_one_to_one_and_prefers_the_larger_overlap()
    {
        // The track's box is (50,50,10,10). Region a at (52,50): overlap 80/120 = 0.667; region b at (56,50): 40/160 = 0.25.
        // Both qualify; a continues the track and b starts a second one.
        var linker = new TrackLinker();
        linker.Add(0, 0, 0, W, H, [Box(1, 50, 50, 10, 10)]);
        var assigned = linker.Add(1, 1, 1, W, H, [Box(1, 56, 50, 10, 10), Box(2, 52, 50, 10, 10)]);
        Assert.Equal([2, 1], assigned);
        var tracks = linker.Tracks();
        Assert.Equal(2, tracks.Count);
        Assert.Equal(2, tracks[0].FramesSeen);
        Assert.Equal(52, tracks[0].Last.Left);
        Assert.Equal(56, tracks[1].First.Left);
    }

    [Fact]
    public void Class_beneath_and_mean_score_weigh_every_pixel_once()
    {
        // Sighting 1: 10×10 = 100 px of class 2, mean 1.0. Sightings 2 and 3: 10×6 = 60 px each of class 3, mean 2.0.
        // Class 3 has 120 px against 100: class beneath 3. Mean = (100·1 + 120·2) / 220 = 340/220 = 1.54545…
        var linker = new TrackLinker();
        linker.Add(0, 0, 0, W, H, [Box(1, 50, 50, 10, 10, max: 3, mean: 1, cls: 2)]);
        linker.Add(1, 1, 1, W, H, [Box(1, 50, 52, 10, 6, max: 4, mean: 2, cls: 3)]);
        linker.Add(2, 2, 2, W, H, [Box(1, 50, 52, 10, 6, max: 4, mean: 2, cls: 3)]);
        var t = Assert.Single(linker.Tracks());
        Assert.Equal(3, t.ClassBeneath);
        Assert.Equal(340f / 220f, t.MeanScore, 6);
        Assert.Equal(1, t.Best.Sample); // a tie on 4 goes to the earliest sighting
    }

    [Fact]
    public void The_persistence_rule_keeps_tracks_seen_in_at_least_k_frames()
    {
        var linker = new TrackLinker();
        for (int i = 0; i < 4; i++)
        {
            var regions = new List<Region> { Box(1, 10, 10, 8, 8) };            // seen in all 4 frames
            if (i == 2) regions.Add(Box(2, 150, 70, 5, 5));                     // a one-frame speck
            linker.Add(i, i, i, W, H, regions);
        }
        var all = linker.Tracks();
        Assert.Equal(2, all.Count);
        Assert.Equal(2, PersistenceRule.Keep(all, 1).Count);
        var kept = Assert.Single(PersistenceRule.Keep(all, 3));
        Assert.Equal(4, kept.FramesSeen);
        Assert.Empty(PersistenceRule.Keep(all, 5));
    }

    [Fact]
    public void Frames_out_of_order_and_bad_options_are_refused()
    {
        var linker = new TrackLinker();
        linker.Add(3, 3, 0, W, H, []);
        Assert.Throws<ArgumentException>(() => linker.Add(3, 3, 0, W, H, []));
        Assert.Throws<ArgumentOutOfRangeException>(() => new TrackLinker(new TrackLinkOptions { MissedFrames = -1 }));
        Assert.Throws<ArgumentOutOfRangeException>(() => new TrackLinker(new TrackLinkOptions { MinimumOverlap = 0 }));
    }

    [Fact]
    public void Closed_tracks_are_handed_over_once_and_the_rest_at_the_end_the_same_as_linking_without_taking()
    {
        // A box seen in samples 0–1, then gone; another, far off, from sample 2 on. One missed frame is tolerated: at
        // sample 3 track 1 has missed 3 − 1 − 1 = 1 frame (still open), at sample 4 it has missed 2 and closes.
        var taking = new TrackLinker();
        var keeping = new TrackLinker();
        var taken = new List<(int Sample, Track Track)>();
        Region[][] frames =
        [
            [Box(1, 10, 10, 10, 10)], [Box(1, 11, 10, 10, 10)], [Box(1, 150, 60, 10, 10)],
            [Box(1, 151, 60, 10, 10)], [Box(1, 152, 60, 10, 10)], [Box(1, 153, 60, 10, 10)],
        ];
        for (int i = 0; i < frames.Length; i++)
        {
            Assert.Equal(keeping.Add(i, i, 0.1 * i, W, H, frames[i]), taking.Add(i, i, 0.1 * i, W, H, frames[i]));
            foreach (var t in taking.TakeClosed()) taken.Add((i, t));
        }
        // Track 1 was last seen at sample 1: samples 2 and 3 missed it, so it closes as sample 4 comes in.
        var first = Assert.Single(taken);
        Assert.Equal((4, 1, 2), (first.Sample, first.Track.Id, first.Track.FramesSeen));
        Assert.Equal([2], taking.Tracks().Select(t => t.Id));
        foreach (var t in taking.TakeClosed(all: true)) taken.Add((frames.Length, t));
        Assert.Empty(taking.Tracks());
        Assert.Empty(taking.TakeClosed(all: true));
        var expected = keeping.Tracks();
        Assert.Equal(expected.Select(t => (t.Id, t.FramesSeen, t.MaxScore, t.MeanScore, t.Best.FrameIndex)),
            taken.Select(x => x.Track).Select(t => (t.Id, t.FramesSeen, t.MaxScore, t.MeanScore, t.Best.FrameIndex)));
    }
}
