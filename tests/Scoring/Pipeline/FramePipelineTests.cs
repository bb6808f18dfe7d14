using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Reduction;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Tests.Scoring.Pipeline;

public class FramePipelineTests
{
    private static readonly ScoringOptions Plain = new()
    {
        BoundarySuppression = new BoundarySuppressionOptions { Enabled = false },
        Smoothing = new SmoothingOptions { Enabled = false },
        MinimumRegionArea = 1,
    };

    /// <summary>Two classes left|right, confident (max logit 10), with a 6×6 low-confidence patch (max logit 4) at (20,8).</summary>
    private static LogitsView SceneWithPatch(out int patchX, out int patchY)
    {
        const int h = 24, w = 40;
        patchX = 20; patchY = 8;
        var data = new float[2 * h * w];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                bool left = x < w / 2 - 8;
                bool patch = x >= patchX && x < patchX + 6 && y >= patchY && y < patchY + 6;
                float top = patch ? 4f : 10f;
                data[(0 * h + y) * w + x] = left ? top : 0f;
                data[(1 * h + y) * w + x] = left ? 0f : top;
            }
        return new LogitsView(data, 2, h, w);
    }

    private static ClassStatistics Stats() => new([new("left", 1000, 10, 1), new("right", 1000, 10, 2)]);

    [Fact]
    public void Max_logit_score_is_the_negated_max_logit()
    {
        var logits = SceneWithPatch(out _, out _);
        var s = new FramePipeline(Plain with { Method = ScoreMethod.MaxLogit, Threshold = -7 }, null).Score(logits, 24, 40);
        for (int i = 0; i < s.AnomalyScore.Length; i++) Assert.Equal(-s.MaxLogit[i], s.AnomalyScore[i]);
    }

    [Fact]
    public void Sml_uses_the_predicted_class_statistics_and_finds_the_patch_as_one_region()
    {
        var logits = SceneWithPatch(out int px, out int py);
        // Patch pixels are class "right": SML = (4 - 10) / 2 = -3, anomaly score 3; elsewhere 0.
        var s = new FramePipeline(Plain with { Method = ScoreMethod.Sml, Threshold = 2.5f }, Stats()).Score(logits, 24, 40);
        Assert.Equal(3f, s.AnomalyScore[(py + 1) * 40 + px + 1], 5);
        Assert.Equal(0f, s.AnomalyScore[0], 5);
        var region = Assert.Single(s.Regions.Regions);
        Assert.Equal((px, py, 6, 6), (region.Left, region.Top, region.Width, region.Height));
        Assert.Equal(36, s.FlaggedPixels);
        Assert.Equal(3f, s.FrameScore, 5);
    }

    [Fact]
    public void Upsampled_class_boundary_is_a_false_region_until_boundary_suppression_removes_it()
    {
        var logits = SceneWithPatch(out int px, out int py);
        // Interpolating between two confident classes halves the max logit along the boundary.
        var without = new FramePipeline(Plain with { Method = ScoreMethod.Sml, Threshold = 2.0f }, Stats()).Score(logits, 96, 160);
        Assert.Equal(2, without.Regions.Regions.Count);

        var options = Plain with { Method = ScoreMethod.Sml, Threshold = 2.0f, BoundarySuppression = new BoundarySuppressionOptions() };
        var s = new FramePipeline(options, Stats()).Score(logits, 96, 160);
        var region = Assert.Single(s.Regions.Regions);
        // 4× upsampling: the patch centre (px+3, py+3) maps to 4·(px+3), 4·(py+3).
        Assert.InRange(region.CentroidX, 4 * (px + 3) - 1.5, 4 * (px + 3) + 1.5);
        Assert.InRange(region.CentroidY, 4 * (py + 3) - 1.5, 4 * (py + 3) + 1.5);
    }

    [Fact]
    public void Full_method_runs_with_default_stages_and_reuses_buffers_across_frame_sizes()
    {
        var logits = SceneWithPatch(out _, out _);
        var pipeline = new FramePipeline(new ScoringOptions { MinimumRegionArea = 1 }, Stats());
        var big = pipeline.Score(logits, 96, 160);
        Assert.Equal(96 * 160, big.AnomalyScore.Length);
        var small = pipeline.Score(logits, 24, 40);
        Assert.Equal(24 * 40, small.AnomalyScore.Length);
        foreach (float v in small.AnomalyScore) Assert.True(float.IsFinite(v));
    }

    [Fact]
    public void Sml_without_statistics_is_refused()
    {
        var e = Assert.Throws<ScoringInputException>(() => new FramePipeline(new ScoringOptions(), null));
        Assert.Equal(ScoringErrorCodes.StatisticsMismatch, e.Code);
    }

    [Fact]
    public void Statistics_for_another_class_count_are_refused_with_both_numbers()
    {
        var logits = SceneWithPatch(out _, out _);
        var three = new ClassStatistics([new("a", 1000, 1, 1), new("b", 1000, 1, 1), new("c", 1000, 1, 1)]);
        var e = Assert.Throws<ScoringInputException>(() => new FramePipeline(Plain, three).Score(logits, 24, 40));
        Assert.Contains("2", e.Message);
        Assert.Contains("3", e.Message);
    }

    [Fact]
    public void Non_finite_logits_are_refused()
    {
        var data = new float[2 * 3 * 3];
        data[7] = float.NaN;
        var e = Assert.Throws<ScoringInputException>(() =>
            new FramePipeline(Plain with { Method = ScoreMethod.MaxLogit }, null).Score(new LogitsView(data, 2, 3, 3), 3, 3));
        Assert.Equal(ScoringErrorCodes.LogitsNonFinite, e.Code);
    }

    [Theory]
    [InlineData(0, 0, 0, float.NaN)]
    [InlineData(2, 47, 63, float.PositiveInfinity)]
    [InlineData(1, 20, 9, float.NegativeInfinity)]
    public void Non_finite_logits_at_frame_size_are_refused_with_where_the_first_one_is(int channel, int y, int x, float bad)
    {
        // Logits at frame size are checked inside the reduction, band by band: the error must be the plain check's.
        foreach (var (h, w) in new[] { (48, 64), (400, 200) })
        {
            var data = new float[3 * h * w];
            for (int i = 0; i < data.Length; i++) data[i] = (i % 7) * 0.5f;
            data[(channel * h + y) * w + x] = bad;
            var logits = new LogitsView(data, 3, h, w);
            var expected = Assert.Throws<ScoringInputException>(() => LogitsValidation.EnsureFinite(logits));
            var e = Assert.Throws<ScoringInputException>(() =>
                new FramePipeline(Plain with { Method = ScoreMethod.MaxLogit }, null).Score(logits, h, w));
            Assert.Equal(ScoringErrorCodes.LogitsNonFinite, e.Code);
            Assert.Equal(expected.Message, e.Message);
        }
    }

    [Theory]
    [InlineData(ScoreMethod.Msp)]
    [InlineData(ScoreMethod.Entropy)]
    [InlineData(ScoreMethod.Energy)]
    public void Baselines_rank_the_patch_above_the_confident_pixels(ScoreMethod method)
    {
        var logits = SceneWithPatch(out int px, out int py);
        var s = new FramePipeline(Plain with { Method = method }, null).Score(logits, 24, 40);
        Assert.True(s.AnomalyScore[(py + 2) * 40 + px + 2] > s.AnomalyScore[2 * 40 + 2]);
    }

    [Fact]
    public void Single_pixel_frame_works()
    {
        var s = new FramePipeline(new ScoringOptions { MinimumRegionArea = 1, Threshold = 100 }, new ClassStatistics([new("only", 1000, 0, 1)]))
            .Score(new LogitsView(new float[] { 0.5f }, 1, 1, 1), 1, 1);
        Assert.Equal(-0.5f, s.AnomalyScore[0], 5);
        Assert.Empty(s.Regions.Regions);
    }

    /// <summary>
    /// Each method's score against its plain formula on the reduced maps (for SML: standardize, then negate, the
    /// two-step form the one-pass kernel replaces). Bit-equal for every method, on the resized and the frame-sized
    /// path, with smooth and noisy logits.
    /// </summary>
    [Theory]
    [InlineData(17, 29, 40, 70, 1)]
    [InlineData(64, 96, 64, 96, 2)]
    [InlineData(33, 50, 33, 50, 3)]
    public void Score_is_bit_equal_to_each_methods_formula_on_the_reduced_maps(int h, int w, int fh, int fw, int seed)
    {
        const int c = 5;
        var rng = new Random(seed);
        var data = new float[c * h * w];
        for (int i = 0; i < data.Length; i++)
            data[i] = (seed % 2 == 0 ? (float)Math.Sin(i % w * 0.1 + i / (h * w)) * 4 : 0f) + (float)(3 * rng.NextDouble());
        var stats = new ClassStatistics(Enumerable.Range(0, c).Select(k => new ClassStatistic($"k{k}", 1000, k - 2.0, 0.5 + k)).ToList(), 100);
        var sml = new StandardizedMaxLogit(stats);
        foreach (var method in ScoringMethods.All)
        {
            var options = Plain with { Method = method.Id, Threshold = 1e30f };
            var got = new FramePipeline(options, stats).Score(new LogitsView(data, c, h, w), fh, fw).AnomalyScore.ToArray();
            var maps = new ReducedMaps();
            new PixelReduction(method.Outputs).Reduce(new LogitsView(data, c, h, w), fh, fw, maps);
            var expected = new float[fh * fw];
            for (int i = 0; i < expected.Length; i++)
                expected[i] = method.Id switch
                {
                    ScoreMethod.Msp => -maps.Msp[i],
                    ScoreMethod.MaxLogit => -maps.MaxLogit[i],
                    ScoreMethod.Entropy => maps.Entropy[i],
                    ScoreMethod.Energy => maps.Energy[i],
                    _ => 0f,
                };
            if (method.Id == ScoreMethod.Sml)
            {
                sml.Apply(maps.MaxLogit, maps.ClassIndex, expected);
                for (int i = 0; i < expected.Length; i++) expected[i] = -expected[i];
            }
            for (int i = 0; i < expected.Length; i++)
                Assert.True(BitConverter.SingleToInt32Bits(expected[i]) == BitConverter.SingleToInt32Bits(got[i]),
                    $"{method.Name}, pixel {i}: {expected[i]} vs {got[i]}");
        }
    }
}
