using Microsoft.ML;
using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Tests.Scoring.Evaluation;

public class MultiMethodScorerTests
{
    private const int Classes = 4, LogitH = 12, LogitW = 20, FrameH = 48, FrameW = 80;

    private static ClassStatistics Stats() => new(
        [new("a", 1000, 6, 1.5), new("b", 1000, 5, 1), new("c", 1000, 7, 2), new("d", 20, 4, 1)]);

    /// <summary>Blocky class layout with noise and a low-confidence blob, so every stage has something to change.</summary>
    private static LogitsView Logits(int seed)
    {
        var rng = new Random(seed);
        var data = new float[Classes * LogitH * LogitW];
        for (int y = 0; y < LogitH; y++)
            for (int x = 0; x < LogitW; x++)
            {
                int winner = (x / 5 + y / 4) % Classes;
                bool blob = x >= 8 + seed % 3 && x < 12 + seed % 3 && y >= 4 && y < 8;
                for (int c = 0; c < Classes; c++)
                {
                    float v = (float)(rng.NextDouble() * 2 - 1);
                    if (c == winner) v += blob ? 1.5f : 7f;
                    data[(c * LogitH + y) * LogitW + x] = v;
                }
            }
        return new LogitsView(data, Classes, LogitH, LogitW);
    }

    private static byte[] Labels(int seed)
    {
        var labels = new byte[FrameH * FrameW];
        for (int y = 0; y < FrameH; y++)
            for (int x = 0; x < FrameW; x++)
            {
                int lx = x / 4, ly = y / 4;
                bool blob = lx >= 8 + seed % 3 && lx < 12 + seed % 3 && ly >= 4 && ly < 8;
                labels[y * FrameW + x] = blob ? (byte)1 : (x + y) % 37 == 0 ? (byte)255 : (byte)0;
            }
        return labels;
    }

    private static ScoringOptions Base => new() { Threshold = 1.0f, MinimumRegionArea = 1, EnergyTemperature = 1.5 };

    [Theory]
    [InlineData(EvaluatedMethod.Msp)]
    [InlineData(EvaluatedMethod.MaxLogit)]
    [InlineData(EvaluatedMethod.Entropy)]
    [InlineData(EvaluatedMethod.Energy)]
    [InlineData(EvaluatedMethod.Sml)]
    [InlineData(EvaluatedMethod.SmlBoundary)]
    [InlineData(EvaluatedMethod.Full)]
    public void Each_map_equals_what_the_frame_pipeline_makes_with_that_methods_options(EvaluatedMethod method)
    {
        var scorer = new MultiMethodScorer(Stats(), new MultiMethodOptions { Base = Base });
        var pipeline = new FramePipeline(EvaluatedMethods.OptionsFor(method, Base), Stats());
        for (int seed = 0; seed < 2; seed++)
        {
            var logits = Logits(seed);
            scorer.Score(logits, FrameH, FrameW);
            var expected = pipeline.Score(logits, FrameH, FrameW).AnomalyScore.ToArray();
            var actual = scorer.Map(method).ToArray();
            Assert.Equal(expected.Length, actual.Length);
            for (int i = 0; i < expected.Length; i++)
                Assert.True(Math.Abs(expected[i] - actual[i]) <= 1e-6f, $"{method} pixel {i}: pipeline {expected[i]}, scorer {actual[i]}");
        }
    }

    [Fact]
    public void Options_for_each_method_switch_the_stages_as_named()
    {
        var o = EvaluatedMethods.OptionsFor(EvaluatedMethod.SmlBoundary, Base);
        Assert.Equal((ScoreMethod.Sml, true, false), (o.Method, o.BoundarySuppression.Enabled, o.Smoothing.Enabled));
        o = EvaluatedMethods.OptionsFor(EvaluatedMethod.Full, Base);
        Assert.Equal((ScoreMethod.Sml, true, true), (o.Method, o.BoundarySuppression.Enabled, o.Smoothing.Enabled));
        o = EvaluatedMethods.OptionsFor(EvaluatedMethod.Energy, Base);
        Assert.Equal((ScoreMethod.Energy, false, false, 1.5), (o.Method, o.BoundarySuppression.Enabled, o.Smoothing.Enabled, o.EnergyTemperature));
    }

    [Fact]
    public void A_subset_of_the_chain_gives_the_same_full_map_as_all_methods()
    {
        var all = new MultiMethodScorer(Stats(), new MultiMethodOptions { Base = Base });
        var fullOnly = new MultiMethodScorer(Stats(), new MultiMethodOptions { Base = Base, Methods = [EvaluatedMethod.Full, EvaluatedMethod.MaxLogit] });
        var logits = Logits(1);
        all.Score(logits, FrameH, FrameW);
        fullOnly.Score(logits, FrameH, FrameW);
        Assert.Equal(all.Map(EvaluatedMethod.Full).ToArray(), fullOnly.Map(EvaluatedMethod.Full).ToArray());
        Assert.Throws<ScoringInputException>(() => fullOnly.Map(EvaluatedMethod.Sml).Length);
    }

    [Fact]
    public void Exact_accumulation_matches_exact_metrics_fed_the_same_maps_by_hand()
    {
        var scorer = new MultiMethodScorer(Stats(), new MultiMethodOptions { Base = Base, Exact = true });
        var byHand = EvaluatedMethods.All.ToDictionary(m => m, _ => new ExactPixelMetrics());
        for (int seed = 0; seed < 3; seed++)
        {
            scorer.Score(Logits(seed), FrameH, FrameW);
            var labels = Labels(seed);
            scorer.Accumulate(labels);
            foreach (var m in EvaluatedMethods.All) byHand[m].Add(scorer.Map(m), labels);
        }
        foreach (var r in scorer.Compute(0.95, 0.05))
        {
            var expected = byHand[r.Method].Compute(0.95, 0.05);
            Assert.Equal(expected, r.Pixels);
            Assert.Equal(0, r.Clamped);
        }
    }

    [Fact]
    public void Streaming_accumulation_stays_within_its_error_bounds_of_the_exact_result()
    {
        var streaming = new MultiMethodScorer(Stats(), new MultiMethodOptions { Base = Base });
        var exact = new MultiMethodScorer(Stats(), new MultiMethodOptions { Base = Base, Exact = true });
        for (int seed = 0; seed < 3; seed++)
        {
            var logits = Logits(seed);
            streaming.Score(logits, FrameH, FrameW);
            exact.Score(logits, FrameH, FrameW);
            streaming.Accumulate(Labels(seed));
            exact.Accumulate(Labels(seed));
        }
        var s = streaming.Compute();
        var e = exact.Compute();
        for (int i = 0; i < s.Count; i++)
        {
            var b = s[i].Pixels.ErrorBounds!;
            Assert.InRange(Math.Abs(s[i].Pixels.Auroc - e[i].Pixels.Auroc), 0, b.Auroc + 1e-12);
            Assert.InRange(Math.Abs(s[i].Pixels.AveragePrecision - e[i].Pixels.AveragePrecision), 0, b.AveragePrecision + 1e-12);
            Assert.Equal(e[i].Pixels.Positives, s[i].Pixels.Positives);
            Assert.NotNull(s[i].RangeMin);
        }
        Assert.Equal(7L * 16 * (1 << 16), streaming.AccumulatorBytes);
    }

    [Fact]
    public void Auroc_of_the_full_method_agrees_with_the_ml_net_binary_evaluator()
    {
        // Outside reference: ML.NET's BinaryClassificationCatalog.Evaluate (its AUC) on the same pixels and scores.
        var scorer = new MultiMethodScorer(Stats(), new MultiMethodOptions { Base = Base, Exact = true });
        var rows = new List<Row>();
        for (int seed = 0; seed < 2; seed++)
        {
            scorer.Score(Logits(seed), FrameH, FrameW);
            var labels = Labels(seed);
            scorer.Accumulate(labels);
            var map = scorer.Map(EvaluatedMethod.Full);
            for (int i = 0; i < labels.Length; i++)
                if (labels[i] != 255) rows.Add(new Row { Label = labels[i] == 1, Score = map[i], PredictedLabel = false });
        }
        var ml = new MLContext(seed: 1);
        var metrics = ml.BinaryClassification.EvaluateNonCalibrated(ml.Data.LoadFromEnumerable(rows), "Label", "Score");
        var full = scorer.Compute().Single(r => r.Method == EvaluatedMethod.Full);
        Assert.Equal(metrics.AreaUnderRocCurve, full.Pixels.Auroc, 6);
    }

    private sealed class Row
    {
        public bool Label { get; set; }
        public float Score { get; set; }
        public bool PredictedLabel { get; set; }
    }

    [Fact]
    public void Region_metrics_use_the_pipelines_strict_mask_at_the_given_threshold()
    {
        var scorer = new MultiMethodScorer(Stats(), new MultiMethodOptions { Base = Base, RegionThreshold = 1.0f });
        var by = new RegionMetrics();
        var pipeline = new FramePipeline(EvaluatedMethods.OptionsFor(EvaluatedMethod.Full, Base) with { Threshold = 1.0f }, Stats());
        for (int seed = 0; seed < 2; seed++)
        {
            var logits = Logits(seed);
            scorer.Score(logits, FrameH, FrameW);
            scorer.Accumulate(Labels(seed));
            by.Add(pipeline.Score(logits, FrameH, FrameW).Mask, Labels(seed), FrameW, FrameH);
        }
        var full = scorer.Compute().Single(r => r.Method == EvaluatedMethod.Full);
        Assert.Equal(by.Compute().MeanSIoU, full.Regions!.MeanSIoU);
        Assert.Equal(by.Compute().MeanF1, full.Regions.MeanF1);
        Assert.True(full.Regions.GroundTruthComponents >= 2);
    }

    [Fact]
    public void Bad_input_is_refused_with_a_code()
    {
        Assert.Equal(ScoringErrorCodes.StatisticsMismatch,
            Assert.Throws<ScoringInputException>(() => new MultiMethodScorer(null)).Code);
        var scorer = new MultiMethodScorer(null, new MultiMethodOptions { Methods = [EvaluatedMethod.MaxLogit] });
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() => scorer.Accumulate(new byte[4])).Code);
        scorer.Score(Logits(0), FrameH, FrameW);
        Assert.Equal(EvaluationErrorCodes.LengthMismatch, Assert.Throws<ScoringInputException>(() => scorer.Accumulate(new byte[4])).Code);
        var labels = Labels(0);
        labels[5] = 7;
        Assert.Equal(EvaluationErrorCodes.LabelValue, Assert.Throws<ScoringInputException>(() => scorer.Accumulate(labels)).Code);
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() =>
            new MultiMethodScorer(null, new MultiMethodOptions { Methods = [EvaluatedMethod.Msp, EvaluatedMethod.Msp] })).Code);
    }
}
