using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Reduction;

namespace Strayspot.Tests.Scoring.Reduction;

public class PixelReductionTests
{
    private const ReductionOutputs All = ReductionOutputs.Msp | ReductionOutputs.Entropy | ReductionOutputs.Energy;

    /// <summary>Reduces logits whose every pixel holds the same class vector (so equal sizes and resizing agree).</summary>
    private static ReducedMaps ReduceConstant(float[] perClass, ReductionOutputs outputs, double temperature = 1.0, int h = 3, int w = 11, int outH = 3, int outW = 11)
    {
        int c = perClass.Length;
        var data = new float[c * h * w];
        for (int k = 0; k < c; k++) Array.Fill(data, perClass[k], k * h * w, h * w);
        var maps = new ReducedMaps();
        new PixelReduction(outputs, temperature).Reduce(new LogitsView(data, c, h, w), outH, outW, maps);
        return maps;
    }

    private static void AllNear(float expected, Span<float> actual, float tol = 1e-6f)
    {
        foreach (float v in actual) Assert.True(Math.Abs(v - expected) <= tol, $"expected {expected}, got {v}");
    }

    // Worked by hand: logits [0, ln 3] give p = [1/4, 3/4].
    [Theory]
    [InlineData(3, 11, 3, 11)]
    [InlineData(2, 3, 9, 20)]
    public void Two_classes_zero_and_ln3_worked_by_hand(int h, int w, int outH, int outW)
    {
        var maps = ReduceConstant([0f, MathF.Log(3f)], All, 1.0, h, w, outH, outW);
        Assert.Equal(outH * outW, maps.ClassIndex.Length);
        foreach (var c in maps.ClassIndex) Assert.Equal(1, c);
        AllNear(MathF.Log(3f), maps.MaxLogit);
        AllNear(0.75f, maps.Msp);
        AllNear((float)-(0.25 * Math.Log(0.25) + 0.75 * Math.Log(0.75)), maps.Entropy);
        AllNear((float)-Math.Log(4), maps.Energy);
    }

    // Worked by hand: temperature 2 on [0, ln 3]: −2·ln(e^0 + e^(ln3 / 2)) = −2·ln(1 + √3).
    [Fact]
    public void Energy_at_temperature_two_worked_by_hand()
    {
        var maps = ReduceConstant([0f, MathF.Log(3f)], All, temperature: 2.0);
        AllNear((float)(-2 * Math.Log(1 + Math.Sqrt(3))), maps.Energy);
        AllNear(0.75f, maps.Msp); // MSP and entropy do not depend on the energy temperature
        var energyOnly = ReduceConstant([0f, MathF.Log(3f)], ReductionOutputs.Energy, temperature: 2.0);
        AllNear((float)(-2 * Math.Log(1 + Math.Sqrt(3))), energyOnly.Energy);
        Assert.True(energyOnly.Msp.IsEmpty && energyOnly.Entropy.IsEmpty);
    }

    // Worked by hand: [1000, 1000] is a fair coin: MSP 1/2, entropy ln 2, energy −1000 − ln 2; nothing overflows.
    [Fact]
    public void Large_logits_stay_finite()
    {
        var maps = ReduceConstant([1000f, 1000f], All);
        foreach (var c in maps.ClassIndex) Assert.Equal(0, c);
        AllNear(0.5f, maps.Msp);
        AllNear(MathF.Log(2f), maps.Entropy);
        AllNear(-1000f - MathF.Log(2f), maps.Energy, 1e-4f);

        var far = ReduceConstant([1000f, -1000f, 3e4f], All);
        foreach (var c in far.ClassIndex) Assert.Equal(2, c);
        AllNear(1f, far.Msp);
        AllNear(0f, far.Entropy);
        AllNear(-3e4f, far.Energy);
    }

    [Theory]
    [InlineData(ReductionOutputs.None, 3, 11, 3, 11)]
    [InlineData(ReductionOutputs.None, 3, 11, 7, 40)]
    [InlineData(ReductionOutputs.Msp, 3, 11, 7, 40)]
    public void Ties_go_to_the_lowest_class_index(ReductionOutputs outputs, int h, int w, int outH, int outW)
    {
        var maps = ReduceConstant([1f, 5f, 2f, 5f, 5f], outputs, 1.0, h, w, outH, outW);
        foreach (var c in maps.ClassIndex) Assert.Equal(1, c);
        AllNear(5f, maps.MaxLogit);
        var allEqual = ReduceConstant([-3f, -3f, -3f, -3f], ReductionOutputs.Entropy, 1.0, 4, 4, 9, 17);
        foreach (var c in allEqual.ClassIndex) Assert.Equal(0, c);
        AllNear(MathF.Log(4f), allEqual.Entropy);
    }

    [Fact]
    public void Single_class_is_certain()
    {
        var maps = ReduceConstant([-7.5f], All);
        foreach (var c in maps.ClassIndex) Assert.Equal(0, c);
        AllNear(-7.5f, maps.MaxLogit);
        AllNear(1f, maps.Msp);
        AllNear(0f, maps.Entropy);
        AllNear(7.5f, maps.Energy);
    }

    [Theory]
    [InlineData(1, 1, 1, 1)]
    [InlineData(4, 6, 1, 1)]
    [InlineData(1, 1, 1, 3)]
    public void Tiny_frames_work(int h, int w, int outH, int outW)
    {
        var logits = ReductionAgainstOnnxRuntimeTests.RandomLogits(3 * h * w, 5);
        var view = new LogitsView(logits, 3, h, w);
        var fused = new ReducedMaps();
        var naive = new ReducedMaps();
        new PixelReduction(All).Reduce(view, outH, outW, fused);
        NaiveReduction.Reduce(view, outH, outW, All, 1.0, naive);
        Assert.Equal(naive.ClassIndex.ToArray(), fused.ClassIndex.ToArray());
        AssertClose(naive.MaxLogit, fused.MaxLogit, 1e-5f);
    }

    [Fact]
    public void Bad_frame_size_is_refused_with_its_numbers()
    {
        var view = new LogitsView(new float[2 * 4 * 4], 2, 4, 4);
        var e = Assert.Throws<ScoringInputException>(() => new PixelReduction().Reduce(view, 0, 7, new ReducedMaps()));
        Assert.Equal(ScoringErrorCodes.FrameSize, e.Code);
        Assert.Contains("7×0", e.Message);
    }

    [Fact]
    public void Mismatched_logits_shape_is_refused_with_its_numbers()
    {
        var e = Assert.Throws<ScoringInputException>(() => new LogitsView(new float[100], 2, 4, 4));
        Assert.Equal(ScoringErrorCodes.LogitsShape, e.Code);
        Assert.Contains("32", e.Message);
        Assert.Contains("100", e.Message);
    }

    [Fact]
    public void Bad_options_are_refused()
    {
        Assert.Equal(ScoringErrorCodes.Options, Assert.Throws<ScoringInputException>(() => new PixelReduction(All, 0)).Code);
        Assert.Equal(ScoringErrorCodes.Options, Assert.Throws<ScoringInputException>(() => new PixelReduction(All, double.NaN)).Code);
        Assert.Equal(ScoringErrorCodes.Options, Assert.Throws<ScoringInputException>(() => new PixelReduction((ReductionOutputs)8)).Code);
    }

    internal static void AssertClose(Span<float> expected, Span<float> actual, float tol, string what = "")
    {
        Assert.Equal(expected.Length, actual.Length);
        for (int i = 0; i < expected.Length; i++)
            Assert.True(Math.Abs(expected[i] - actual[i]) <= tol * Math.Max(1f, Math.Abs(expected[i])),
                $"{what}[{i}]: expected {expected[i]}, got {actual[i]}");
    }

    /// <summary>Fused against the naive oracle on random logits over many shapes, including reuse of one
    /// <see cref="ReducedMaps"/> and one <see cref="PixelReduction"/> across frames of changing size.</summary>
    [Theory]
    [InlineData(All)]
    [InlineData(ReductionOutputs.None)] // class and max logit only take a separate two-blocks-at-once kernel
    public void Fused_equals_naive_on_random_logits_of_many_sizes(ReductionOutputs outputs)
    {
        var rng = new Random(11 + (int)outputs);
        var reduction = new PixelReduction(outputs, 1.5);
        var fused = new ReducedMaps();
        for (int trial = 0; trial < 60; trial++)
        {
            int c = rng.Next(1, 24), h = rng.Next(1, 30), w = rng.Next(1, 40);
            int outH = rng.Next(3) == 0 ? h : rng.Next(1, 90), outW = rng.Next(3) == 0 ? w : rng.Next(1, 120);
            var logits = ReductionAgainstOnnxRuntimeTests.RandomLogits(c * h * w, trial, scale: 20f);
            var view = new LogitsView(logits, c, h, w);
            var naive = new ReducedMaps();
            NaiveReduction.Reduce(view, outH, outW, outputs, 1.5, naive);
            reduction.Reduce(view, outH, outW, fused);
            string at = $"trial {trial} C={c} {h}×{w}→{outH}×{outW}";
            AssertClose(naive.MaxLogit, fused.MaxLogit, 1e-5f, at + " max");
            AssertClose(naive.Msp, fused.Msp, 1e-5f, at + " msp");
            AssertClose(naive.Entropy, fused.Entropy, 1e-5f, at + " entropy");
            AssertClose(naive.Energy, fused.Energy, 1e-5f, at + " energy");
            var up = NaiveReduction.Upsample(view, outH, outW);
            int n = outH * outW;
            for (int p = 0; p < n; p++)
            {
                int k = fused.ClassIndex[p];
                // The fused class must be a maximum of the upsampled values, up to rounding of the blend.
                Assert.True(Math.Abs(up[k * n + p] - naive.MaxLogit[p]) <= 1e-5f * Math.Max(1f, Math.Abs(naive.MaxLogit[p])), $"{at} pixel {p} class {k}");
            }
        }
    }

    /// <summary>
    /// Frame-sized logits (the 512-bit, 256-bit pair and single-block kernels, by row width) against the naive
    /// oracle: class and max logit exactly equal, with many exact ties (values on a coarse grid) and without.
    /// </summary>
    [Theory]
    [InlineData(8)]
    [InlineData(31)]
    [InlineData(32)]
    [InlineData(47)]
    [InlineData(64)]
    [InlineData(100)]
    [InlineData(1029)]
    public void Frame_sized_reduction_equals_naive_exactly_with_and_without_ties(int w)
    {
        foreach (bool ties in new[] { true, false })
        {
            const int c = 19, h = 5;
            var rng = new Random(w * 2 + (ties ? 1 : 0));
            var data = new float[c * h * w];
            for (int i = 0; i < data.Length; i++) data[i] = ties ? rng.Next(4) : (float)(20 * rng.NextDouble() - 10);
            var view = new LogitsView(data, c, h, w);
            var naive = new ReducedMaps();
            var fused = new ReducedMaps();
            NaiveReduction.Reduce(view, h, w, ReductionOutputs.None, 1.0, naive);
            new PixelReduction().Reduce(view, h, w, fused);
            Assert.Equal(naive.ClassIndex.ToArray(), fused.ClassIndex.ToArray());
            Assert.Equal(naive.MaxLogit.ToArray(), fused.MaxLogit.ToArray());
            Assert.Equal(w >= 8, fused.LogitsCheckedFinite);
        }
    }

    /// <summary>
    /// The frame-sized pass vouches for finiteness only when every logit is finite: one NaN or infinity anywhere
    /// (first or last class, inside the wide kernel, the pair kernel or the row's tail) withdraws it.
    /// </summary>
    [Theory]
    [InlineData(0, 0, 0)]
    [InlineData(18, 4, 5)]
    [InlineData(7, 2, 40)]
    [InlineData(18, 4, 99)]
    [InlineData(3, 1, 97)]
    public void Frame_sized_pass_vouches_for_finite_logits_only(int channel, int y, int x)
    {
        const int c = 19, h = 5, w = 100;
        foreach (float bad in new[] { float.NaN, float.PositiveInfinity, float.NegativeInfinity })
        {
            var data = ReductionAgainstOnnxRuntimeTests.RandomLogits(c * h * w, 5, scale: 20f);
            var maps = new ReducedMaps();
            new PixelReduction().Reduce(new LogitsView(data, c, h, w), h, w, maps);
            Assert.True(maps.LogitsCheckedFinite);
            data[(channel * h + y) * w + x] = bad;
            new PixelReduction().Reduce(new LogitsView(data, c, h, w), h, w, maps);
            Assert.False(maps.LogitsCheckedFinite, $"{bad} at class {channel}, y {y}, x {x}");
        }
    }

    [Theory]
    [InlineData(ReductionOutputs.None)]
    [InlineData(All)]
    public void Many_classes_split_wide_rows_into_tiles_and_still_match_naive(ReductionOutputs outputs)
    {
        // 600 classes × 150 columns exceeds one cached-row budget, so the row is processed in several tiles.
        var view = new LogitsView(ReductionAgainstOnnxRuntimeTests.RandomLogits(600 * 6 * 9, 3), 600, 6, 9);
        var naive = new ReducedMaps();
        var fused = new ReducedMaps();
        NaiveReduction.Reduce(view, 11, 150, outputs, 1.0, naive);
        new PixelReduction(outputs).Reduce(view, 11, 150, fused);
        Assert.Equal(naive.ClassIndex.ToArray(), fused.ClassIndex.ToArray());
        AssertClose(naive.MaxLogit, fused.MaxLogit, 1e-5f);
        AssertClose(naive.Entropy, fused.Entropy, 1e-5f);
    }

    [Fact]
    public void One_instance_serves_concurrent_frames_of_different_sizes()
    {
        var reduction = new PixelReduction(ReductionOutputs.Msp);
        var a = new LogitsView(ReductionAgainstOnnxRuntimeTests.RandomLogits(5 * 20 * 30, 1), 5, 20, 30);
        var b = new LogitsView(ReductionAgainstOnnxRuntimeTests.RandomLogits(5 * 13 * 17, 2), 5, 13, 17);
        var expectA = new ReducedMaps();
        var expectB = new ReducedMaps();
        NaiveReduction.Reduce(a, 80, 120, ReductionOutputs.Msp, 1.0, expectA);
        NaiveReduction.Reduce(b, 50, 70, ReductionOutputs.Msp, 1.0, expectB);
        Parallel.For(0, 16, i =>
        {
            var maps = new ReducedMaps();
            var (view, h, w, expect) = i % 2 == 0 ? (a, 80, 120, expectA) : (b, 50, 70, expectB);
            for (int k = 0; k < 5; k++)
            {
                reduction.Reduce(view, h, w, maps);
                AssertClose(expect.MaxLogit, maps.MaxLogit, 1e-5f);
                AssertClose(expect.Msp, maps.Msp, 1e-5f);
            }
        });
    }

    [Fact]
    public void Steady_state_frames_allocate_nothing_per_pixel_or_row()
    {
        // Serial so every allocation happens on this thread. A frame may allocate a small fixed amount (its job object,
        // and the runtime's own bookkeeping while methods tier up), never anything that grows with rows or pixels:
        // so compare a frame 16 times larger.
        var reduction = new PixelReduction(All) { MaxDegreeOfParallelism = 1 };
        var view = new LogitsView(ReductionAgainstOnnxRuntimeTests.RandomLogits(19 * 32 * 64, 9), 19, 32, 64);
        long PerFrame(int h, int w)
        {
            var maps = new ReducedMaps();
            for (int i = 0; i < 3; i++) reduction.Reduce(view, h, w, maps);
            long before = GC.GetAllocatedBytesForCurrentThread();
            for (int i = 0; i < 10; i++) reduction.Reduce(view, h, w, maps);
            return (GC.GetAllocatedBytesForCurrentThread() - before) / 10;
        }
        long small = PerFrame(128, 256), large = PerFrame(512, 1024);
        Assert.True(large - small < 1024, $"{small} bytes per 128×256 frame, {large} per 512×1024 frame");
        Assert.True(large < 8192, $"{large} bytes per 512×1024 frame");
    }

    [Fact]
    public void Maps_grow_only_when_needed_and_optional_maps_follow_the_request()
    {
        var maps = new ReducedMaps();
        maps.EnsureSize(8, 4, ReductionOutputs.Msp);
        Assert.Equal(32, maps.Msp.Length);
        Assert.True(maps.Entropy.IsEmpty && maps.Energy.IsEmpty);
        var before = maps.MaxLogitArray;
        maps.EnsureSize(4, 4, ReductionOutputs.None);
        Assert.Same(before, maps.MaxLogitArray);
        Assert.Equal(16, maps.MaxLogit.Length);
        Assert.True(maps.Msp.IsEmpty);
    }
}
