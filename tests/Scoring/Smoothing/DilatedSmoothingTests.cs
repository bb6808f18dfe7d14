using OpenCvSharp;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Smoothing;

namespace Strayspot.Tests.Scoring.Smoothing;

public class DilatedSmoothingTests
{
    public static TheoryData<int, int, int, double, int> Cases => new()
    {
        // width, height, k, σ, d
        { 64, 48, 7, 1.0, 6 },
        { 10, 9, 7, 1.0, 6 },      // smaller than the kernel extent (37)
        { 1, 1, 7, 1.0, 6 },
        { 1, 40, 5, 1.5, 3 },
        { 40, 1, 5, 1.5, 3 },
        { 37, 37, 7, 1.0, 6 },     // exactly the extent
        { 131, 77, 3, 0.8, 1 },
        { 300, 260, 7, 1.0, 6 },   // above the parallel threshold
        { 45, 50, 9, 2.0, 2 },
    };

    /// <summary>Outside reference: OpenCV filter2D (through OpenCvSharp4) with the explicit dilated 2-D kernel and BORDER_REPLICATE.</summary>
    [Theory]
    [MemberData(nameof(Cases))]
    public void Matches_OpenCV_filter2D_with_the_dilated_kernel_and_replicate_border(int w, int h, int k, double sigma, int d)
    {
        var rng = new Random(w * 31 + h * 7 + k);
        var values = new float[w * h];
        for (int i = 0; i < values.Length; i++) values[i] = (float)(rng.NextDouble() * 6 - 3);

        var stage = new DilatedSmoothing(new SmoothingOptions { KernelSize = k, Sigma = sigma, Dilation = d });
        var g = stage.Kernel.ToArray();
        int extent = (k - 1) * d + 1;
        var kernel2d = new float[extent * extent];
        for (int i = 0; i < k; i++)
            for (int j = 0; j < k; j++)
                kernel2d[i * d * extent + j * d] = g[i] * g[j];

        var expected = new float[w * h];
        using (var src = Mat.FromPixelData(h, w, MatType.CV_32FC1, values))
        using (var ker = Mat.FromPixelData(extent, extent, MatType.CV_32FC1, kernel2d))
        using (var dst = new Mat())
        {
            Cv2.Filter2D(src, dst, MatType.CV_32F, ker, borderType: BorderTypes.Replicate);
            dst.GetArray(out float[] flat);
            flat.CopyTo(expected, 0);
        }

        stage.Apply(values, w, h);
        for (int i = 0; i < values.Length; i++)
            Assert.True(Math.Abs(expected[i] - values[i]) <= 1e-5f, $"{w}×{h} at ({i % w},{i / w}): OpenCV {expected[i]}, ours {values[i]}");
    }

    [Theory]
    [InlineData(50, 40)]
    [InlineData(3, 2)]
    [InlineData(300, 260)]
    public void Constant_map_stays_constant(int w, int h)
    {
        var values = Enumerable.Repeat(2.75f, w * h).ToArray();
        new DilatedSmoothing(new SmoothingOptions()).Apply(values, w, h);
        foreach (var v in values) Assert.Equal(2.75f, v, 1e-5f);
    }

    [Theory]
    [InlineData(7, 1.0)]
    [InlineData(1, 1.0)]
    [InlineData(15, 3.5)]
    [InlineData(63, 0.3)]
    public void Kernel_sums_to_one_is_symmetric_and_peaks_in_the_middle(int k, double sigma)
    {
        var g = new DilatedSmoothing(new SmoothingOptions { KernelSize = k, Sigma = sigma }).Kernel.ToArray();
        Assert.Equal(k, g.Length);
        Assert.Equal(1.0, g.Sum(x => (double)x), 1e-6);
        for (int i = 0; i < k; i++) Assert.Equal(g[i], g[k - 1 - i]);
        for (int i = 0; i < k / 2; i++) Assert.True(g[i] <= g[i + 1]);
    }

    [Fact]
    public void Kernel_taps_follow_the_gaussian_ratio()
    {
        // g_1 / g_0 = exp(−1/(2σ²)) for σ = 1.
        var g = new DilatedSmoothing(new SmoothingOptions { KernelSize = 7, Sigma = 1.0 }).Kernel;
        Assert.Equal(Math.Exp(-0.5), g[4] / g[3], 1e-6);
        Assert.Equal(Math.Exp(-4.5), g[6] / g[3], 1e-6);
    }

    [Fact]
    public void One_tap_without_dilation_is_the_identity()
    {
        var rng = new Random(2);
        var values = Enumerable.Range(0, 300).Select(_ => (float)rng.NextDouble()).ToArray();
        var before = (float[])values.Clone();
        new DilatedSmoothing(new SmoothingOptions { KernelSize = 1, Sigma = 1, Dilation = 1 }).Apply(values, 20, 15);
        Assert.Equal(before, values);
    }

    [Fact]
    public void Bad_options_and_sizes_are_refused_with_their_numbers()
    {
        var e = Assert.Throws<ScoringInputException>(() => new DilatedSmoothing(new SmoothingOptions { KernelSize = 4 }));
        Assert.Equal(ScoringErrorCodes.Options, e.Code);
        Assert.Contains("4", e.Message);
        e = Assert.Throws<ScoringInputException>(() => new DilatedSmoothing(new SmoothingOptions()).Apply(new float[10], 3, 3));
        Assert.Equal(ScoringErrorCodes.FrameSize, e.Code);
        Assert.Contains("10", e.Message);
    }

    /// <summary>
    /// The 512-bit row kernels against the 256-bit ones, to the bit, on random and structured maps whose widths put
    /// the interior on, off and across the vector widths. Both give the same bits, so flipping the switch cannot
    /// disturb a test running beside this one.
    /// </summary>
    [Theory]
    [InlineData(7, 5)]
    [InlineData(40, 30)]
    [InlineData(83, 61)]
    [InlineData(300, 257)]
    public void Wide_kernels_give_the_same_bits_as_the_narrow_ones(int w, int h)
    {
        var rng = new Random(w + 7 * h);
        foreach (var options in new[] { new SmoothingOptions(), new SmoothingOptions { KernelSize = 5, Sigma = 2.5, Dilation = 1 } })
            foreach (bool structured in new[] { false, true })
            {
                var values = new float[w * h];
                for (int i = 0; i < values.Length; i++)
                    values[i] = structured ? (i % w / 9 + i / w / 5) % 2 * 3f - 1f : (float)(rng.NextDouble() * 8 - 4);
                var narrow = (float[])values.Clone();
                DilatedSmoothing.WideKernels = false;
                try { new DilatedSmoothing(options).Apply(narrow, w, h); }
                finally { DilatedSmoothing.WideKernels = true; }
                new DilatedSmoothing(options).Apply(values, w, h);
                for (int i = 0; i < values.Length; i++)
                    Assert.True(BitConverter.SingleToInt32Bits(narrow[i]) == BitConverter.SingleToInt32Bits(values[i]),
                        $"{w}×{h} k={options.KernelSize} structured={structured} at ({i % w},{i / w}): {narrow[i]} vs {values[i]}");
            }
    }
}
