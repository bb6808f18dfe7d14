using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Reduction;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Bench;

/// <summary>The scoring core's cases: the full chain per stage, the naive baseline, and allocation per frame.</summary>
public static class ScoringBench
{
    private const int Classes = 19;

    public static void Run(int runs)
    {
        var stats = Statistics(Classes);
        var full = new ScoringOptions { Method = ScoreMethod.Sml };

        Console.WriteLine();
        Console.WriteLine("| case | reduction | SML | boundary suppression | smoothing | mask + regions | whole chain | naive reduction | naive chain / fused chain | bytes allocated per frame |");
        Console.WriteLine("|---|---|---|---|---|---|---|---|---|---|");
        Case("A: C=19, logits 256×512 → frame 1024×2048, SML + BS + DS + regions", 256, 512, 1024, 2048, full, stats, runs);
        Case("B: C=19, logits 512×1024 at frame size, SML + BS + DS + regions", 512, 1024, 512, 1024, full, stats, runs);
        Console.WriteLine();
        Console.WriteLine("Times are medians in ms; the naive reduction upsamples all C channels to a C×H×W buffer, then reduces.");
    }

    /// <summary>Made-up class statistics for the synthetic logits: means and spreads that grow a little with the class.</summary>
    internal static ClassStatistics Statistics(int classes) => new(Enumerable.Range(0, classes)
        .Select(c => new ClassStatistic($"class_{c}", 10_000, 8 + 0.1 * c, 1.5 + 0.05 * c)).ToList());

    private static void Case(string name, int h, int w, int frameH, int frameW, ScoringOptions options, ClassStatistics stats, int runs)
    {
        var logits = new LogitsView(SyntheticLogits.Make(Classes, h, w, seed: 7), Classes, h, w);
        var pipeline = new FramePipeline(options, stats);
        var stage = new List<double>[6];
        for (int i = 0; i < stage.Length; i++) stage[i] = new List<double>(runs);
        double whole = Measure.MedianMs(runs, () =>
        {
            var s = pipeline.Score(logits, frameH, frameW);
            var t = s.Timings;
            stage[0].Add(t.Reduction.TotalMilliseconds);
            stage[1].Add(t.Standardization.TotalMilliseconds);
            stage[2].Add(t.BoundarySuppression.TotalMilliseconds);
            stage[3].Add(t.Smoothing.TotalMilliseconds);
            stage[4].Add(t.Regions.TotalMilliseconds);
            stage[5].Add(t.Total.TotalMilliseconds);
        });
        var maps = new ReducedMaps();
        maps.EnsureSize(frameW, frameH, ReductionOutputs.None);
        double naive = Measure.MedianMs(Math.Max(3, runs / 3), () => NaiveReduction.Reduce(logits, frameH, frameW, ReductionOutputs.None, 1.0, maps));
        double bytes = Measure.AllocatedBytesPerCall(5, () => pipeline.Score(logits, frameH, frameW));
        double reduction = Measure.Median(stage[0]);
        double rest = Measure.Median(stage[5]) - reduction;
        double ratio = (naive + rest) / Measure.Median(stage[5]);
        Console.WriteLine($"| {name} | {Measure.Median(stage[0]):0.0} | {Measure.Median(stage[1]):0.0} | {Measure.Median(stage[2]):0.0} | " +
            $"{Measure.Median(stage[3]):0.0} | {Measure.Median(stage[4]):0.0} | **{whole:0.0}** | {naive:0.0} | {ratio:0.0}× | {bytes:0} |");
    }
}
