using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;

namespace Strayspot.Tests.Scoring.Evaluation;

public class StreamingPixelMetricsTests
{
    private static (PixelMetricsResult Exact, PixelMetricsResult Stream) Both(float[] s, byte[] l, float min, float max, int bins,
        double tpr = 0.95, double? fpr = 0.1)
    {
        var e = new ExactPixelMetrics();
        e.Add(s, l);
        var h = new StreamingPixelMetrics(min, max, bins);
        h.Add(s, l);
        return (e.Compute(tpr, fpr), h.Compute(tpr, fpr));
    }

    [Fact]
    public void Matches_scikit_learn_documentation_example_when_scores_fall_in_distinct_bins()
    {
        // scikit-learn docs (recalled from memory): AUROC 0.75, AP 5/6 for labels [0,0,1,1], scores [0.1,0.4,0.35,0.8].
        var h = new StreamingPixelMetrics(0, 1);
        h.Add([0.1f, 0.4f, 0.35f, 0.8f], [0, 0, 1, 1]);
        var r = h.Compute();
        Assert.Equal(0.75, r.Auroc, 12);
        Assert.Equal(5.0 / 6.0, r.AveragePrecision, 12);
        Assert.Equal(0, r.ErrorBounds!.Auroc);
    }

    [Theory]
    [InlineData(10, 1 << 16, 6)]
    [InlineData(100, 16, 6)]
    [InlineData(1000, 64, 6)]
    [InlineData(1000, 7, 2)]
    [InlineData(10_000, 256, 3)]
    [InlineData(10_000, 1 << 16, 7)]
    [InlineData(100_000, 1 << 10, 7)]
    [InlineData(100_000, 1 << 16, 1)]
    public void Differs_from_exact_by_no_more_than_its_stated_bounds(int n, int bins, int decimals)
    {
        for (int seed = 0; seed < 4; seed++)
        {
            var (s, l) = PixelReference.Random(n, seed + n + bins, decimals);
            // Part of the data outside the range exercises clamping.
            var (e, h) = Both(s, l, 0.05f, 1.3f, bins, 0.9, 0.2);
            var b = h.ErrorBounds!;
            Assert.InRange(Math.Abs(h.Auroc - e.Auroc), 0, b.Auroc + 1e-12);
            Assert.InRange(Math.Abs(h.AveragePrecision - e.AveragePrecision), 0, b.AveragePrecision + 1e-12);
            // Binning can only reach the TPR target later and the FPR target earlier.
            Assert.InRange(h.FprAtTpr - e.FprAtTpr, -1e-12, b.FprAtTpr + 1e-12);
            Assert.InRange(e.TprAtFpr!.Value - h.TprAtFpr!.Value, -1e-12, b.TprAtFpr!.Value + 1e-12);
            Assert.Equal((e.Positives, e.Negatives), (h.Positives, h.Negatives));
        }
    }

    [Fact]
    public void Bounds_are_not_vacuous_coarse_bins_move_the_metrics_and_fine_bins_shrink_the_error()
    {
        var (s, l) = PixelReference.Random(50_000, 1, decimals: 7);
        var (e, coarse) = Both(s, l, 0, 1.4f, 8);
        Assert.True(Math.Abs(coarse.Auroc - e.Auroc) > 1e-4, "8 bins must visibly change AUROC");
        Assert.True(coarse.ErrorBounds!.Auroc < 0.1);
        var (_, fine) = Both(s, l, 0, 1.4f, 1 << 16);
        // Empirical tolerance at the default bin count: continuous scores rarely share a bin.
        Assert.True(fine.ErrorBounds!.Auroc < 1e-4);
        Assert.True(Math.Abs(fine.Auroc - e.Auroc) < 1e-4);
        Assert.True(Math.Abs(fine.AveragePrecision - e.AveragePrecision) < 1e-3);
    }

    [Theory]
    [InlineData(1)]
    [InlineData(2)]
    [InlineData(3)]
    public void Heavy_ties_each_in_its_own_bin_give_exactly_the_exact_result(int decimals)
    {
        // Scores on a 10^-d grid, range and bins chosen so each grid value sits in the middle of its own bin:
        // the histogram groups are exactly the tied groups.
        var (s, l) = PixelReference.Random(40_000, decimals, decimals, ignoreRate: 0.1);
        int steps = (int)Math.Pow(10, decimals);
        float half = 0.5f / steps;
        // Grid values 0 .. 1.4 → 1.4·10^d + 1 bins of width 10^-d centred on them.
        int bins = (int)Math.Round(1.4 * steps) + 1;
        var (e, h) = Both(s, l, -half, (float)(1.4 + 0.5 / steps), bins);
        Assert.Equal(0, new StreamingPixelMetrics(-half, (float)(1.4 + 0.5 / steps), bins).Clamped);
        Assert.Equal(e.Auroc, h.Auroc, 12);
        Assert.Equal(e.AveragePrecision, h.AveragePrecision, 12);
        Assert.Equal(e.FprAtTpr, h.FprAtTpr, 12);
        Assert.Equal(e.TprAtFpr!.Value, h.TprAtFpr!.Value, 12);
        Assert.True(h.ErrorBounds!.Auroc > 0, "tied pairs share bins, so the bound is positive although the error is zero");
    }

    [Fact]
    public void Out_of_range_scores_are_clamped_and_counted_and_ignore_pixels_are_not()
    {
        var h = new StreamingPixelMetrics(0, 1, 10);
        h.Add([-5f, 0f, 0.5f, 1f, 2f, float.PositiveInfinity, 9f, float.NaN], [0, 0, 1, 1, 1, 0, 255, 255]);
        Assert.Equal(3, h.Clamped); // −5, 2, +∞; 1.0 is the upper end of the range, not outside it
        Assert.Equal((0L, 2L), h.BinCounts(0)); // −5 and 0
        Assert.Equal((2L, 1L), h.BinCounts(9)); // 1.0, 2 (anomalies) and +∞
        Assert.Equal((3L, 3L), (h.Positives, h.Negatives));
        var r = h.Compute(curves: true);
        // Nothing-flagged threshold lies above the highest clamped score (+∞ here); the lowest bin's threshold
        // reaches down to the lowest clamped score so that flagging at it really flags everything.
        Assert.True(double.IsPositiveInfinity(r.Curves!.Roc[0].Threshold));
        Assert.Equal(-5.0, r.Curves.Roc[^1].Threshold);
    }

    [Fact]
    public void Merge_adds_histograms_and_equals_one_accumulator()
    {
        var (s, l) = PixelReference.Random(30_000, 8, decimals: 4);
        var whole = new StreamingPixelMetrics(0, 1.5f, 1000);
        whole.Add(s, l);
        var parts = Enumerable.Range(0, 3).Select(_ => new StreamingPixelMetrics(0, 1.5f, 1000)).ToArray();
        Parallel.For(0, 3, p => parts[p].Add(s.AsSpan(p * 10_000, 10_000), l.AsSpan(p * 10_000, 10_000)));
        parts[0].Merge(parts[1]);
        parts[0].Merge(parts[2]);
        Assert.Equal(whole.Compute(0.9, 0.1), parts[0].Compute(0.9, 0.1));
        var e = Assert.Throws<ScoringInputException>(() => parts[0].Merge(new StreamingPixelMetrics(0, 1.5f, 999)));
        Assert.Equal(EvaluationErrorCodes.MergeMismatch, e.Code);
        Assert.Contains("999", e.Message);
    }

    [Fact]
    public void Bad_input_is_refused_with_its_values_and_leaves_the_histograms_unchanged()
    {
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() => new StreamingPixelMetrics(1, 1)).Code);
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() => new StreamingPixelMetrics(0, float.NaN)).Code);
        var bins = Assert.Throws<ScoringInputException>(() => new StreamingPixelMetrics(0, 1, 1));
        Assert.Contains("got 1", bins.Message);
        var h = new StreamingPixelMetrics(0, 1, 4);
        h.Add([0.2f, 0.8f], [0, 1]);
        var bad = Assert.Throws<ScoringInputException>(() => h.Add([0.1f, 0.9f, 0.3f], [1, 0, 2]));
        Assert.Equal(EvaluationErrorCodes.LabelValue, bad.Code);
        Assert.Contains("got 2 at position 2", bad.Message);
        Assert.Equal(EvaluationErrorCodes.ScoreNaN, Assert.Throws<ScoringInputException>(() => h.Add([float.NaN], [0])).Code);
        Assert.Equal((1L, 1L), (h.Positives, h.Negatives));
        Assert.Equal((0L, 1L), h.BinCounts(0));
    }

    [Fact]
    public void Thresholds_are_bin_lower_edges_and_curves_are_bounded()
    {
        var (s, l) = PixelReference.Random(20_000, 6, decimals: 7, ignoreRate: 0);
        var h = new StreamingPixelMetrics(0, 1.4f, 1 << 14);
        h.Add(s, l);
        var r = h.Compute(0.95, 0.05, curves: true);
        int bin = (int)Math.Round((r.ThresholdAtTpr - 0) / (1.4 / (1 << 14)));
        Assert.Equal(h.BinLowerEdge(bin), r.ThresholdAtTpr, 9);
        Assert.InRange(r.Curves!.Roc.Count, 2, PixelCurves.MaxPoints);
        Assert.Equal((1.0, 1.0), (r.Curves.Roc[^1].Fpr, r.Curves.Roc[^1].Tpr));
    }
}
