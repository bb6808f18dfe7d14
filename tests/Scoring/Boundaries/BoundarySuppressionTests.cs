using Strayspot.Scoring.Boundaries;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Tests.Scoring.Boundaries;

public class BoundarySuppressionTests
{
    public static TheoryData<int, int> Sizes => new()
    {
        { 1, 1 }, { 1, 17 }, { 23, 1 }, { 2, 2 }, { 3, 50 }, { 64, 3 }, { 33, 35 }, { 70, 41 }, { 97, 130 },
        { 300, 257 }, // above the parallel threshold: several bands
        { 2000, 40 }, // above it and short: bands only just taller than the seams between them
    };

    [Theory]
    [MemberData(nameof(Sizes))]
    public void Equals_the_definition_on_random_class_maps(int w, int h)
    {
        var rng = new Random(w * 1000 + h);
        var options = new[]
        {
            new BoundarySuppressionOptions(),
            new BoundarySuppressionOptions { InitialWidth = 1, WidthStep = 0, Iterations = 2 },
            new BoundarySuppressionOptions { InitialWidth = 7, WidthStep = 2, Iterations = 5 },
            new BoundarySuppressionOptions { InitialWidth = 20, WidthStep = 3, Iterations = 3 },
        };
        foreach (var o in options)
        {
            var stage = new BoundarySuppression(o);
            for (int trial = 0; trial < 3; trial++)
            {
                var cls = BoundaryReference.RandomClasses(rng, w, h, 1 + rng.Next(5));
                var score = RandomScores(rng, w * h);
                var expected = BoundaryReference.Apply(score, cls, w, h, o);
                stage.Apply(score, cls, w, h);
                for (int i = 0; i < score.Length; i++)
                    Assert.True(Math.Abs(expected[i] - score[i]) <= 1e-5f,
                        $"{w}×{h} r0={o.InitialWidth} at ({i % w},{i / w}): expected {expected[i]}, got {score[i]}");
            }
        }
    }

    /// <summary>
    /// The 512-bit row kernels against the 256-bit ones, to the bit: random class maps (every row dense with
    /// boundaries) and wide class stripes (rows with few boundary pixels), every size above, default and wide
    /// options. Both give the same bits, so flipping the switch cannot disturb a test running beside this one.
    /// </summary>
    [Theory]
    [MemberData(nameof(Sizes))]
    public void Wide_kernels_give_the_same_bits_as_the_narrow_ones(int w, int h)
    {
        var rng = new Random(w * 31 + h);
        foreach (var o in new[] { new BoundarySuppressionOptions(), new BoundarySuppressionOptions { InitialWidth = 7, WidthStep = 2, Iterations = 5 } })
            foreach (bool stripes in new[] { false, true })
            {
                var cls = stripes ? new ushort[w * h] : BoundaryReference.RandomClasses(rng, w, h, 3);
                if (stripes)
                    for (int i = 0; i < cls.Length; i++) cls[i] = (ushort)((i % w + 3 * (i / w)) / 37 % 3);
                var score = RandomScores(rng, w * h);
                var narrow = (float[])score.Clone();
                BoundarySuppression.WideKernels = false;
                try { new BoundarySuppression(o).Apply(narrow, cls, w, h); }
                finally { BoundarySuppression.WideKernels = true; }
                new BoundarySuppression(o).Apply(score, cls, w, h);
                for (int i = 0; i < score.Length; i++)
                    Assert.True(BitConverter.SingleToInt32Bits(narrow[i]) == BitConverter.SingleToInt32Bits(score[i]),
                        $"{w}×{h} r0={o.InitialWidth} stripes={stripes} at ({i % w},{i / w}): {narrow[i]} vs {score[i]}");
            }
    }

    [Fact]
    public void Reused_instance_across_frame_sizes_matches_the_definition()
    {
        var o = new BoundarySuppressionOptions();
        var stage = new BoundarySuppression(o);
        var rng = new Random(5);
        foreach (var (w, h) in new[] { (300, 257), (5, 4), (260, 300), (1, 1), (41, 39) })
        {
            var cls = BoundaryReference.RandomClasses(rng, w, h, 3);
            var score = RandomScores(rng, w * h);
            var expected = BoundaryReference.Apply(score, cls, w, h, o);
            stage.Apply(score, cls, w, h);
            for (int i = 0; i < score.Length; i++) Assert.Equal(expected[i], score[i], 1e-5f);
        }
    }

    [Theory]
    [InlineData(300, 230)]
    [InlineData(61, 40)]
    public void Equals_the_definition_with_few_boundaries_per_row(int w, int h)
    {
        // Large plain regions: a slanted border, small objects (some at the frame's left and right edges)
        // so most rows have only a few boundary pixels, as in real class maps.
        var cls = new ushort[w * h];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                ushort c = (ushort)(x > y / 3 + w / 2 ? 1 : 0);
                if (y % 50 is >= 10 and < 16 && x % 70 is >= 20 and < 31) c = 2;
                if (y % 37 is >= 5 and < 9 && (x < 3 || x >= w - 2)) c = 3;
                cls[y * w + x] = c;
            }
        var rng = new Random(w + h);
        var o = new BoundarySuppressionOptions();
        var score = RandomScores(rng, w * h);
        var expected = BoundaryReference.Apply(score, cls, w, h, o);
        new BoundarySuppression(o).Apply(score, cls, w, h);
        for (int i = 0; i < score.Length; i++)
            Assert.True(Math.Abs(expected[i] - score[i]) <= 1e-5f, $"at ({i % w},{i / w}): expected {expected[i]}, got {score[i]}");
    }

    [Theory]
    [MemberData(nameof(Sizes))]
    public void Distance_map_matches_brute_force_boundary_test_at_every_width(int w, int h)
    {
        var rng = new Random(h * 7919 + w);
        var cls = BoundaryReference.RandomClasses(rng, w, h, 2 + rng.Next(3));
        const int cap = 9;
        var dist = new byte[w * h];
        unsafe
        {
            fixed (ushort* c = cls)
            fixed (byte* d = dist)
                DistanceToEdges.Compute(c, d, w, h, cap, FrameBands.BandCount(w, h));
        }
        for (int r = 1; r <= cap; r++)
            for (int y = 0; y < h; y++)
                for (int x = 0; x < w; x++)
                    Assert.True(BoundaryReference.IsBoundary(cls, w, h, x, y, r) == dist[y * w + x] <= r - 1,
                        $"{w}×{h} r={r} at ({x},{y}): distance {dist[y * w + x]}");
    }

    [Theory]
    [InlineData(1, 1)]
    [InlineData(1, 40)]
    [InlineData(40, 1)]
    [InlineData(300, 257)]
    public void Single_class_frame_is_left_unchanged(int w, int h)
    {
        var rng = new Random(3);
        var cls = Enumerable.Repeat((ushort)4, w * h).ToArray();
        var score = RandomScores(rng, w * h);
        var before = (float[])score.Clone();
        new BoundarySuppression(new BoundarySuppressionOptions()).Apply(score, cls, w, h);
        Assert.Equal(before, score);
    }

    [Fact]
    public void Straight_boundary_band_is_raised_to_the_interior_and_the_object_is_untouched()
    {
        // Two classes meet at x = 20 | 21 (vertical). Left interior 1.0, right interior 1.5, a band of 0.2 over
        // the pixels within 4 of the other class (x = 17..24), an object of 5.0 deep in the left region.
        const int w = 42, h = 30;
        var cls = new ushort[w * h];
        var score = new float[w * h];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                int i = y * w + x;
                cls[i] = (ushort)(x <= 20 ? 0 : 1);
                score[i] = x is >= 17 and <= 24 ? 0.2f : x <= 20 ? 1.0f : 1.5f;
                if (x is >= 5 and <= 8 && y is >= 12 and <= 15) score[i] = 5.0f;
            }
        var before = (float[])score.Clone();
        new BoundarySuppression(new BoundarySuppressionOptions { InitialWidth = 4, WidthStep = 1, Iterations = 4 })
            .Apply(score, cls, w, h);

        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                int i = y * w + x;
                if (x is >= 17 and <= 24)
                    // Each round pulls the band's outer column to its neighbour's value; four rounds reach the boundary.
                    Assert.Equal(x <= 20 ? 1.0f : 1.5f, score[i]);
                else
                    Assert.Equal(before[i], score[i]);
            }
    }

    [Fact]
    public void Disabled_stage_changes_nothing()
    {
        var rng = new Random(8);
        var cls = BoundaryReference.RandomClasses(rng, 30, 20, 3);
        var score = RandomScores(rng, 600);
        var before = (float[])score.Clone();
        new BoundarySuppression(new BoundarySuppressionOptions { Enabled = false }).Apply(score, cls, 30, 20);
        Assert.Equal(before, score);
    }

    [Fact]
    public void Mismatched_sizes_and_bad_options_are_refused_with_their_numbers()
    {
        var stage = new BoundarySuppression(new BoundarySuppressionOptions());
        var e = Assert.Throws<ScoringInputException>(() => stage.Apply(new float[12], new ushort[11], 4, 3));
        Assert.Equal(ScoringErrorCodes.FrameSize, e.Code);
        Assert.Contains("11", e.Message);
        e = Assert.Throws<ScoringInputException>(() => stage.Apply(new float[0], new ushort[0], 0, 0));
        Assert.Equal(ScoringErrorCodes.FrameSize, e.Code);
        e = Assert.Throws<ScoringInputException>(() => new BoundarySuppression(new BoundarySuppressionOptions { InitialWidth = 0 }));
        Assert.Equal(ScoringErrorCodes.Options, e.Code);
        Assert.Contains("0", e.Message);
    }

    private static float[] RandomScores(Random rng, int n)
    {
        var s = new float[n];
        for (int i = 0; i < n; i++) s[i] = (float)(rng.NextDouble() * 8 - 4);
        return s;
    }
}
