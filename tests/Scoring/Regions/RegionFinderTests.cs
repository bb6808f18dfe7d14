using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Regions;

namespace Strayspot.Tests.Scoring.Regions;

public class RegionFinderTests
{
    /// <summary>Builds a frame from text: one char per pixel; '#' = in the mask.</summary>
    private static (byte[] Mask, int W, int H) Mask(params string[] rows)
    {
        int h = rows.Length, w = rows[0].Length;
        var m = new byte[w * h];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
                m[y * w + x] = (byte)(rows[y][x] == '#' ? 1 : 0);
        return (m, w, h);
    }

    private static ushort[] Classes(params string[] rows)
    {
        int h = rows.Length, w = rows[0].Length;
        var c = new ushort[w * h];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
                c[y * w + x] = (ushort)(rows[y][x] - '0');
        return c;
    }

    /// <summary>Classes 2 = sky, 0 = apron: one mask pixel with only sky around it, and a pair standing on the apron.</summary>
    private static (ushort[] Classes, byte[] Mask, int W, int H) SkyPixelAndApronPair()
    {
        var cls = Classes(
            "22222",
            "22222",
            "22220",
            "00222");
        var (mask, w, h) = Mask(
            ".....",
            "..#..",   // all 8-neighbours are sky: off the surface
            ".....",
            "##...");  // covers two apron pixels: majority apron, on the surface
        return (cls, mask, w, h);
    }

    [Fact]
    public void Surface_filter_keeps_regions_on_or_touching_a_surface_class()
    {
        // Classes: 2 = sky (top), 0 = apron surface (bottom rows), 1 = building (right).
        var cls = Classes(
            "2222222222111",
            "2222222222111",
            "2222222222111",
            "2222222222111",
            "0000000000111",
            "0000000000111");
        var (mask, w, h) = Mask(
            "##.......#...",   // A: sky, far from the apron -> dropped
            "##.........##",   // D: on the building, surrounded by building -> dropped
            ".............",
            "...##.......#",   // B: sky, directly above apron pixels -> kept (touch); E: building pixel, neighbours apron? no
            "......##.....",   // C: on the apron -> kept (majority)
            ".............");
        var score = Enumerable.Range(0, w * h).Select(i => (float)i).ToArray();
        var set = new RegionFinder().Find(mask, w, h, score, cls, 3, new RegionFilter(1, new[] { 0 }));

        Assert.Equal(6, set.ComponentsFound);
        Assert.Equal(4, set.DroppedBySurface);
        Assert.Equal(0, set.DroppedByArea);
        Assert.Collection(set.Regions,
            b => { Assert.Equal((1, 3, 3, 2, 1), (b.Id, b.Left, b.Top, b.Width, b.Height)); Assert.Equal(2, b.MajorityClass); Assert.True(b.OnSurface); },
            c => { Assert.Equal((2, 6, 4, 2, 1), (c.Id, c.Left, c.Top, c.Width, c.Height)); Assert.Equal(0, c.MajorityClass); Assert.True(c.OnSurface); });
        // Kept ids in the label map, dropped components are background.
        var labels = set.Labels;
        Assert.Equal(1, labels[3 * w + 3]);
        Assert.Equal(2, labels[4 * w + 7]);
        Assert.Equal(0, labels[0]);
        Assert.Equal(0, labels[1 * w + 11]);
        Assert.Equal(0, labels[3 * w + 12]);
    }

    [Fact]
    public void Surface_classes_that_only_mark_keep_every_region_and_say_which_lie_on_a_surface()
    {
        // The sky pixel and the apron pair of the test below, marked instead of filtered.
        var (cls, mask, w, h) = SkyPixelAndApronPair();
        var set = new RegionFinder().Find(mask, w, h, new float[w * h], cls, 3, new RegionFilter(1, new[] { 0 }, KeepOnlyOnSurface: false));
        Assert.Equal(0, set.DroppedBySurface);
        Assert.Collection(set.Regions,
            sky => { Assert.Equal((2, 1), (sky.Left, sky.Top)); Assert.False(sky.OnSurface); },
            apron => { Assert.Equal((0, 3), (apron.Left, apron.Top)); Assert.True(apron.OnSurface); });

        // The options choose: a profile's own surface classes filter; the descriptor's only mark.
        var marked = new Strayspot.Scoring.Pipeline.ScoringOptions { MarkedSurfaceClasses = [0] }.RegionFilter();
        Assert.False(marked.KeepOnlyOnSurface);
        Assert.Equal([0], marked.SurfaceClasses!);
        var filtering = new Strayspot.Scoring.Pipeline.ScoringOptions { SurfaceClasses = [1], MarkedSurfaceClasses = [0] }.RegionFilter();
        Assert.True(filtering.KeepOnlyOnSurface);
        Assert.Equal([1], filtering.SurfaceClasses!);
    }

    [Fact]
    public void Diagonal_surface_neighbour_counts_as_touching_but_surface_pixels_inside_a_minority_do_not()
    {
        var (cls, mask, w, h) = SkyPixelAndApronPair();
        var set = new RegionFinder().Find(mask, w, h, new float[w * h], cls, 3, new RegionFilter(1, new[] { 0 }));
        Assert.Equal(2, set.ComponentsFound);
        Assert.Single(set.Regions);
        Assert.Equal((0, 3), (set.Regions[0].Left, set.Regions[0].Top));

        // The single pixel at (3,1) has (4,2) as diagonal neighbour: with the apron there it is kept.
        var (mask2, _, _) = Mask(
            ".....",
            "...#.",
            ".....",
            ".....");
        var kept = new RegionFinder().Find(mask2, w, h, new float[w * h], cls, 3, new RegionFilter(1, new[] { 0 }));
        Assert.Single(kept.Regions);
        Assert.True(kept.Regions[0].OnSurface);
        Assert.Equal(2, kept.Regions[0].MajorityClass);

        // Three pixels, two sky one apron, the apron pixel inside the region and no apron outside it: dropped.
        var cls3 = Classes(
            "22222",
            "20222",
            "22222",
            "22222");
        var (mask3, _, _) = Mask(
            ".....",
            "###..",
            ".....",
            ".....");
        var dropped = new RegionFinder().Find(mask3, w, h, new float[w * h], cls3, 3, new RegionFilter(1, new[] { 0 }));
        Assert.Empty(dropped.Regions);
        Assert.Equal(1, dropped.DroppedBySurface);
    }

    [Fact]
    public void Statistics_of_a_region_majority_share_scores_and_ties()
    {
        var cls = Classes(
            "1133",
            "1333",
            "2200");
        var (mask, w, h) = Mask(
            "###.",
            "##..",
            "....");
        var score = new float[] { 1, 2, 3, 9, 4, 5, 9, 9, 9, 9, 9, 9 };
        var r = Assert.Single(new RegionFinder().Find(mask, w, h, score, cls, 4, new RegionFilter(1, null)).Regions);
        Assert.Equal(5, r.Area);
        Assert.Equal(5.0 / 12, r.AreaShare, 12);
        Assert.Equal((0 + 1 + 2 + 0 + 1) / 5.0, r.CentroidX, 12);
        Assert.Equal((0 + 0 + 0 + 1 + 1) / 5.0, r.CentroidY, 12);
        Assert.Equal(5f, r.MaxScore);
        Assert.Equal(3f, r.MeanScore, 6);
        Assert.Equal(1, r.MajorityClass);   // class 1 ×3, class 3 ×2
        Assert.Equal(0.6, r.MajorityShare, 12);
        Assert.False(r.OnSurface);          // no surface classes given

        // A tie goes to the smaller class index.
        var tie = Classes("3311");
        var (m2, w2, h2) = Mask("####");
        var t = Assert.Single(new RegionFinder().Find(m2, w2, h2, new float[4], tie, 4, new RegionFilter(1, null)).Regions);
        Assert.Equal(1, t.MajorityClass);
        Assert.Equal(0.5, t.MajorityShare);
    }

    [Fact]
    public void Minimum_area_drops_small_components_and_ids_follow_raster_order_of_kept_ones()
    {
        var (mask, w, h) = Mask(
            "#...##..",
            "....##..",
            "#......#",
            "##....##",
            ".#....#.");
        var set = new RegionFinder().Find(mask, w, h, new float[w * h], new ushort[w * h], 1, new RegionFilter(4, null));
        Assert.Equal(4, set.ComponentsFound);   // (0,0) alone, the 2×2 block, the 4-pixel zigzag at left, the hook at right
        Assert.Equal(1, set.DroppedByArea);
        Assert.Equal(new long[] { 4, 4, 4 }, set.Regions.Select(r => r.Area));
        Assert.Equal(new[] { 1, 2, 3 }, set.Regions.Select(r => r.Id));
        Assert.Equal(new[] { (4, 0), (0, 2), (6, 2) }, set.Regions.Select(r => (r.Left, r.Top)));
        Assert.Equal(0, set.Labels[0]);
        Assert.Equal(1, set.Labels[4]);
        Assert.Equal(2, set.Labels[2 * w]);
        Assert.Equal(3, set.Labels[4 * w + 6]);

        var none = new RegionFinder().Find(mask, w, h, new float[w * h], new ushort[w * h], 1, new RegionFilter(5, null));
        Assert.Empty(none.Regions);
        Assert.Equal(4, none.DroppedByArea);
    }

    [Fact]
    public void One_pixel_frame()
    {
        var finder = new RegionFinder();
        var on = finder.Find(new byte[] { 1 }, 1, 1, new[] { 2.5f }, new ushort[] { 3 }, 4, new RegionFilter(1, new[] { 3 }));
        var r = Assert.Single(on.Regions);
        Assert.Equal(new Region(1, 0, 0, 1, 1, 1, 1.0, 0, 0, 2.5f, 2.5f, 3, 1.0, true), r);
        Assert.Equal(1, on.Labels[0]);

        var off = finder.Find(new byte[] { 0 }, 1, 1, new[] { 2.5f }, new ushort[] { 3 }, 4, new RegionFilter(1, null));
        Assert.Empty(off.Regions);
        Assert.Equal(0, off.Labels[0]);
        Assert.Equal(2.5f, FrameScore.Compute(new[] { 2.5f }));
    }

    [Fact]
    public void Labels_of_an_older_frame_are_refused_after_the_finder_moves_on()
    {
        var finder = new RegionFinder();
        var first = finder.Find(new byte[] { 1, 0 }, 2, 1, new float[2], new ushort[2], 1, new RegionFilter(1, null));
        finder.Find(new byte[] { 0, 1 }, 2, 1, new float[2], new ushort[2], 1, new RegionFilter(1, null));
        Assert.Throws<InvalidOperationException>(() => first.Labels.Length);
    }

    [Fact]
    public void Bad_input_is_refused_with_a_stable_code_and_the_numbers()
    {
        var finder = new RegionFinder();
        var e = Assert.Throws<ScoringInputException>(() =>
            finder.Find(new byte[] { 1, 1 }, 2, 1, new float[2], new ushort[] { 0, 7 }, 3, new RegionFilter(1, null)));
        Assert.Equal(ScoringErrorCodes.ClassIndexRange, e.Code);
        Assert.Contains("7", e.Message);
        e = Assert.Throws<ScoringInputException>(() =>
            finder.Find(new byte[3], 2, 1, new float[2], new ushort[2], 1, new RegionFilter(1, null)));
        Assert.Equal(ScoringErrorCodes.FrameSize, e.Code);
        e = Assert.Throws<ScoringInputException>(() =>
            finder.Find(new byte[2], 2, 1, new float[2], new ushort[2], 1, new RegionFilter(1, new[] { 5 })));
        Assert.Equal(ScoringErrorCodes.Options, e.Code);
        Assert.Contains("5", e.Message);
        e = Assert.Throws<ScoringInputException>(() => AnomalyMask.Threshold(new float[4], 0, new byte[3]));
        Assert.Equal(ScoringErrorCodes.FrameSize, e.Code);
        e = Assert.Throws<ScoringInputException>(() => FrameScore.Compute([]));
        Assert.Equal(ScoringErrorCodes.FrameSize, e.Code);
    }

    [Fact]
    public void Frame_score_is_the_largest_score()
    {
        var s = Enumerable.Range(0, 1000).Select(i => (float)Math.Sin(i)).ToArray();
        s[617] = 3.5f;
        Assert.Equal(3.5f, FrameScore.Compute(s));
    }
}
