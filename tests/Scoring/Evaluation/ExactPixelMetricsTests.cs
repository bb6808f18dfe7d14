using Microsoft.ML;
using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;

namespace Strayspot.Tests.Scoring.Evaluation;

public class ExactPixelMetricsTests
{
    private static PixelMetricsResult Exact(float[] s, byte[] l, double tpr = 0.95, double? fpr = null, bool curves = false)
    {
        var m = new ExactPixelMetrics();
        m.Add(s, l);
        return m.Compute(tpr, fpr, curves);
    }

    [Fact]
    public void Matches_scikit_learn_documentation_example()
    {
        // scikit-learn docs (recalled from memory): roc_auc_score([0,0,1,1], [0.1,0.4,0.35,0.8]) == 0.75,
        // average_precision_score of the same == 0.8333… (5/6).
        var r = Exact([0.1f, 0.4f, 0.35f, 0.8f], [0, 0, 1, 1]);
        Assert.Equal(0.75, r.Auroc, 12);
        Assert.Equal(5.0 / 6.0, r.AveragePrecision, 12);
        // Worked by hand: TPR reaches 1 only at threshold 0.35, where one of the two negatives (0.4) is flagged.
        Assert.Equal(0.5, r.FprAtTpr, 12);
        Assert.Equal(0.35f, (float)r.ThresholdAtTpr);
    }

    [Theory]
    [InlineData(2, 1)]
    [InlineData(7, 1)]
    [InlineData(50, 1)]
    [InlineData(50, 2)]
    [InlineData(300, 2)]
    [InlineData(300, 6)]
    [InlineData(1500, 1)]
    [InlineData(1500, 3)]
    public void Auroc_equals_brute_force_pairwise_probability_with_ties_half(int n, int decimals)
    {
        for (int seed = 0; seed < 5; seed++)
        {
            var (s, l) = PixelReference.Random(n, seed * 31 + n, decimals);
            Assert.Equal(PixelReference.PairwiseAuroc(s, l), Exact(s, l).Auroc, 12);
        }
    }

    [Theory]
    [InlineData(2, 1)]
    [InlineData(9, 1)]
    [InlineData(60, 1)]
    [InlineData(400, 2)]
    [InlineData(600, 6)]
    public void Ap_and_operating_points_equal_direct_counting_at_each_distinct_score(int n, int decimals)
    {
        for (int seed = 0; seed < 5; seed++)
        {
            var (s, l) = PixelReference.Random(n, seed * 17 + n, decimals);
            var r = Exact(s, l, 0.8, 0.1);
            Assert.Equal(PixelReference.AveragePrecision(s, l), r.AveragePrecision, 12);
            var (fpr, thr) = PixelReference.FprAtTpr(s, l, 0.8);
            Assert.Equal(fpr, r.FprAtTpr, 12);
            Assert.Equal(thr, r.ThresholdAtTpr);
            Assert.Equal(PixelReference.TprAtFpr(s, l, 0.1), r.TprAtFpr!.Value, 12);
        }
    }

    [Fact]
    public void Reported_thresholds_reproduce_the_reported_rates_when_applied()
    {
        var (s, l) = PixelReference.Random(5000, 3, decimals: 2);
        var r = Exact(s, l, 0.95, 0.2);
        long P = l.Count(x => x == 1), N = l.Count(x => x == 0);
        (double tpr, double fpr) Apply(double t) =>
            ((double)s.Where((v, i) => l[i] == 1 && v >= t).Count() / P, (double)s.Where((v, i) => l[i] == 0 && v >= t).Count() / N);
        var atTpr = Apply(r.ThresholdAtTpr);
        Assert.True(atTpr.tpr >= 0.95);
        Assert.Equal(r.FprAtTpr, atTpr.fpr, 12);
        var atFpr = Apply(r.ThresholdAtFpr!.Value);
        Assert.True(atFpr.fpr <= 0.2);
        Assert.Equal(r.TprAtFpr!.Value, atFpr.tpr, 12);
    }

    [Fact]
    public void Fpr_target_below_the_first_point_recommends_a_threshold_that_flags_nothing()
    {
        // The highest score is a negative: any flagging gives FPR > 0.
        var r = Exact([0.9f, 0.5f, 0.2f], [0, 1, 0], fpr: 0);
        Assert.Equal(0, r.TprAtFpr);
        Assert.True(r.ThresholdAtFpr > 0.9f);
    }

    [Fact]
    public void Ignore_pixels_are_not_counted_whatever_their_score()
    {
        var (s, l) = PixelReference.Random(3000, 5, decimals: 2, ignoreRate: 0);
        var withIgnore = s.Concat(new float[] { 100f, -100f, float.PositiveInfinity, float.NaN }).ToArray();
        var labels = l.Concat(new byte[] { 255, 255, 255, 255 }).ToArray();
        Assert.Equal(Exact(s, l), Exact(withIgnore, labels));
    }

    [Fact]
    public void Bad_label_is_refused_with_value_and_position_and_the_batch_is_not_kept()
    {
        var m = new ExactPixelMetrics();
        m.Add([0.3f, 0.2f], [1, 0]);
        var e = Assert.Throws<ScoringInputException>(() => m.Add([0.1f, 0.2f, 0.3f, 0.4f], [0, 1, 0, 7]));
        Assert.Equal(EvaluationErrorCodes.LabelValue, e.Code);
        Assert.Contains("7", e.Message);
        Assert.Contains("position 3", e.Message);
        Assert.Equal(1, m.Positives);
        Assert.Equal(1, m.Negatives);
    }

    [Fact]
    public void NaN_score_length_mismatch_one_class_and_bad_targets_are_refused()
    {
        var m = new ExactPixelMetrics();
        var nan = Assert.Throws<ScoringInputException>(() => m.Add([0.1f, float.NaN], [0, 1]));
        Assert.Equal(EvaluationErrorCodes.ScoreNaN, nan.Code);
        Assert.Contains("position 1", nan.Message);
        Assert.Equal(EvaluationErrorCodes.LengthMismatch,
            Assert.Throws<ScoringInputException>(() => m.Add([0.1f], [0, 1])).Code);
        m.Add([0.1f, 0.2f], [0, 0]);
        var one = Assert.Throws<ScoringInputException>(() => m.Compute());
        Assert.Equal(EvaluationErrorCodes.OneClass, one.Code);
        Assert.Contains("0 anomaly and 2 in-distribution", one.Message);
        m.Add([0.3f], [1]);
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() => m.Compute(0)).Code);
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() => m.Compute(1.5)).Code);
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() => m.Compute(0.9, -0.1)).Code);
    }

    [Fact]
    public void Merged_parts_and_several_frames_give_the_same_result_as_one_batch_and_compute_is_repeatable()
    {
        var (s, l) = PixelReference.Random(20000, 9, decimals: 3);
        var whole = Exact(s, l, 0.9, 0.05);
        var a = new ExactPixelMetrics();
        var b = new ExactPixelMetrics();
        for (int start = 0; start < s.Length; start += 1000)
        {
            var target = (start / 1000) % 2 == 0 ? a : b;
            target.Add(s.AsSpan(start, 1000), l.AsSpan(start, 1000));
        }
        var firstB = b.Compute(0.9, 0.05); // sorts b's buffers; merging afterwards must still work
        Assert.NotEqual(whole.Auroc, firstB.Auroc);
        a.Merge(b);
        Assert.Equal(whole, a.Compute(0.9, 0.05));
        Assert.Equal(whole, a.Compute(0.9, 0.05));
    }

    [Fact]
    public void Clear_forgets_pixels_and_a_size_hint_changes_nothing_but_memory()
    {
        var (s, l) = PixelReference.Random(5000, 21, decimals: 2);
        var hinted = new ExactPixelMetrics(expectedPixels: 100);
        hinted.Add([5f, 6f], [1, 0]);
        hinted.Compute();
        hinted.Clear();
        Assert.Equal((0L, 0L), (hinted.Positives, hinted.Negatives));
        hinted.Add(s, l);
        Assert.Equal(Exact(s, l, 0.9, 0.1), hinted.Compute(0.9, 0.1));
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() => new ExactPixelMetrics(-1)).Code);
    }

    [Fact]
    public void Negative_zero_ties_with_zero_and_infinities_are_ordered()
    {
        // -0 and +0 are one tied group: one positive vs one negative tie → ½.
        Assert.Equal(0.5, Exact([-0f, 0f], [1, 0]).Auroc, 12);
        Assert.Equal(1.0, Exact([float.PositiveInfinity, float.MaxValue, -1f, float.NegativeInfinity], [1, 1, 0, 0]).Auroc, 12);
    }

    [Fact]
    public void Curves_have_at_most_1000_points_span_both_ends_and_integrate_to_the_auroc()
    {
        var (s, l) = PixelReference.Random(30000, 2, decimals: 6);
        var r = Exact(s, l, curves: true);
        var roc = r.Curves!.Roc;
        Assert.InRange(roc.Count, 900, PixelCurves.MaxPoints);
        Assert.Equal((0.0, 0.0), (roc[0].Fpr, roc[0].Tpr));
        Assert.Equal((1.0, 1.0), (roc[^1].Fpr, roc[^1].Tpr));
        for (int i = 1; i < roc.Count; i++)
        {
            Assert.True(roc[i].Fpr >= roc[i - 1].Fpr && roc[i].Tpr >= roc[i - 1].Tpr);
            Assert.True(roc[i].Threshold < roc[i - 1].Threshold);
        }
        Assert.Equal(1.0, r.Curves.PrecisionRecall[^1].Recall);
        // Few distinct scores: every point is kept and the trapezoids over them are exactly the AUROC.
        var (s2, l2) = PixelReference.Random(30000, 2, decimals: 2);
        var r2 = Exact(s2, l2, curves: true);
        var all = r2.Curves!.Roc;
        Assert.Equal(s2.Where((_, i) => l2[i] != 255).Distinct().Count() + 1, all.Count);
        double area = 0;
        for (int i = 1; i < all.Count; i++) area += (all[i].Fpr - all[i - 1].Fpr) * (all[i].Tpr + all[i - 1].Tpr) / 2;
        Assert.Equal(r2.Auroc, area, 12);
    }

    private sealed class Row
    {
        public bool Label { get; set; }
        public float Score { get; set; }
        public bool PredictedLabel { get; set; }
    }

    private static Microsoft.ML.Data.BinaryClassificationMetrics MlNet(float[] s, byte[] l)
    {
        var rows = new List<Row>();
        for (int i = 0; i < s.Length; i++)
            if (l[i] != 255) rows.Add(new Row { Label = l[i] == 1, Score = s[i], PredictedLabel = s[i] > 0.5f });
        var ml = new MLContext(seed: 1);
        return ml.BinaryClassification.EvaluateNonCalibrated(ml.Data.LoadFromEnumerable(rows), "Label", "Score");
    }

    [Theory]
    [InlineData(50, 1)]
    [InlineData(500, 2)]
    [InlineData(5000, 2)]
    [InlineData(20000, 1)]
    [InlineData(20000, 6)]
    public void Auroc_matches_MLNET_binary_classification_evaluator_with_ties(int n, int decimals)
    {
        // ML.NET 5.0.1 EvaluateNonCalibrated: its AUC counts a tied positive–negative pair as ½ (checked empirically
        // here: equal to ~1e-15 even with scores on a 0.1 grid), the same definition as ours.
        var (s, l) = PixelReference.Random(n, n + decimals, decimals);
        Assert.Equal(MlNet(s, l).AreaUnderRocCurve, Exact(s, l).Auroc, 1e-6);
    }

    [Theory]
    [InlineData(500)]
    [InlineData(20000)]
    public void Mlnet_area_under_pr_curve_is_a_different_estimator_close_to_ap_only_without_ties(int n)
    {
        // ML.NET's AreaUnderPrecisionRecallCurve is not AP: it walks examples one by one (ties split in input order),
        // adds (ΔR)·(P_before + P_after)/2 where P_before is the precision just before this positive, and samples
        // at most 100,000 rows. Without ties, each positive's term differs from AP's ΔR·P_after by
        // ΔR·(P_after − P_before)/2 ≥ 0 except the first (P_before = 1), and P_after − P_before ≤ 1/rank, so
        // −1/(2P) ≤ AP − AUPRC ≤ (1 + ln n)/(2P). With ties it can differ by several percent (seen: 2.6% on a 0.1 grid),
        // so nothing is asserted there.
        var (s, l) = PixelReference.Random(n, 11, decimals: 7, ignoreRate: 0);
        var seen = new HashSet<float>();
        for (int i = 0; i < n; i++)
            while (!seen.Add(s[i])) s[i] = BitIncrement(s[i]); // float rounding made a few ties: undo them
        Assert.Equal(s.Length, s.Distinct().Count());
        double ap = Exact(s, l).AveragePrecision, auprc = MlNet(s, l).AreaUnderPrecisionRecallCurve;
        long P = l.Count(x => x == 1);
        Assert.InRange(ap - auprc, -1.0 / (2 * P), (1 + Math.Log(n)) / (2 * P));
    }

    private static float BitIncrement(float x) => MathF.BitIncrement(x);

    [Fact]
    public void Radix_sort_orders_keys_like_float_comparison()
    {
        var rng = new Random(4);
        foreach (int n in new[] { 0, 1, 100, 511, 512, 5000, 100_000 })
        {
            var f = new float[n];
            for (int i = 0; i < n; i++)
                f[i] = (i % 50) switch
                {
                    0 => float.NegativeInfinity, 1 => float.PositiveInfinity, 2 => -0f, 3 => 0f, 4 => float.Epsilon,
                    5 => -float.Epsilon, 6 => float.MaxValue, 7 => float.MinValue,
                    _ => (float)((rng.NextDouble() - 0.5) * Math.Pow(10, rng.Next(-30, 30))),
                };
            var keys = f.Select(Strayspot.Scoring.Evaluation.OrderedScoreKeys.ToKey).ToArray();
            Strayspot.Scoring.Evaluation.OrderedScoreKeys.Sort(keys);
            var expected = (float[])f.Clone();
            Array.Sort(expected);
            var got = keys.Select(Strayspot.Scoring.Evaluation.OrderedScoreKeys.ToScore).ToArray();
            for (int i = 0; i < n; i++)
                Assert.True(expected[i] == got[i], $"n={n} i={i}: {expected[i]} vs {got[i]}");
        }
    }
}
