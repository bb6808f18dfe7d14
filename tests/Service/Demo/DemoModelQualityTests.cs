using Strayspot.Service.Demo;
using Xunit.Abstractions;

namespace Strayspot.Tests.Service.Demo;

/// <summary>The demo model must behave like a trained network: accurate on normal frames, less confident on debris.</summary>
[Collection(DemoCollection.Name)]
public sealed class DemoModelQualityTests(DemoFixture fixture, ITestOutputHelper output)
{
    // Seeds 2 (normal) and 3 (debris, the held-out set) are never used for training (seed 1).
    private static readonly IReadOnlyList<ApronFrame> NormalHeldOut = ApronSceneSet.Normal(6, 2);

    [Fact]
    public void LabelsHeldOutNormalFramesWell()
    {
        double accuracy = DemoEvaluation.Accuracy(fixture.Model, NormalHeldOut);
        output.WriteLine($"pixel accuracy at logit resolution on 6 held-out normal frames: {accuracy:P2} (demo rebuilt in {fixture.BuildTime.TotalSeconds:F1} s)");
        Assert.True(accuracy > 0.9, $"accuracy {accuracy:P2}");
    }

    [Fact]
    public void PerClassMaxLogitLevelsDiffer()
    {
        var stats = fixture.Result.Statistics.Classes;
        foreach (var s in stats) output.WriteLine($"{s.Name,-9} count={s.Count,8} mean={s.Mean:F3} std={s.Std:F3}");
        double lowest = stats.Min(s => s.Mean), highest = stats.Max(s => s.Mean);
        double typicalStd = stats.Average(s => s.Std);
        Assert.All(stats, s => Assert.True(s.Count > 0, $"class {s.Name} is never predicted on training frames"));
        Assert.True(highest - lowest > typicalStd, $"class means span {lowest:F2}..{highest:F2}, typical std {typicalStd:F2}");
    }

    [Fact]
    public void MaxLogitIsLowerOnDebrisThanOnPavement()
    {
        double debrisSum = 0, pavementSum = 0;
        long debrisCount = 0, pavementCount = 0;
        foreach (var df in DemoAssets.HeldOut(6))
        {
            var map = DemoEvaluation.Run(fixture.Model, df.Frame);
            var cells = DemoFeatures.CellLabels(df.Frame.Labels, df.Frame.Height, df.Frame.Width, ApronClasses.Count);
            var debrisCells = DemoFeatures.CellLabels(df.AnomalyMask, df.Frame.Height, df.Frame.Width, 2);
            for (int p = 0; p < map.Pixels; p++)
            {
                float ml = map.At(p).MaxLogit;
                if (debrisCells[p] == ApronDebrisPainter.Anomaly) { debrisSum += ml; debrisCount++; }
                else if (cells[p] == ApronClasses.Pavement) { pavementSum += ml; pavementCount++; }
            }
        }
        double debris = debrisSum / debrisCount, pavement = pavementSum / pavementCount;
        output.WriteLine($"mean max logit: debris {debris:F3} ({debrisCount} cells), pavement {pavement:F3} ({pavementCount} cells)");
        Assert.True(debrisCount > 100);
        Assert.True(debris < pavement, $"debris {debris:F3} vs pavement {pavement:F3}");
    }

    [Fact]
    public void FrameResolutionMetricsOnHeldOutDebris()
    {
        var frames = DemoAssets.HeldOut(20);
        var results = DemoFrameMetrics.Measure(fixture.Model, frames, fixture.Result.Statistics);
        var first = results[DemoFrameMetrics.Method.Msp];
        double baseRate = (double)first.Positives / (first.Positives + first.Negatives);
        output.WriteLine($"20 held-out debris frames at 1024x512, debris = {baseRate:P2} of scored pixels");
        foreach (var (method, r) in results)
            output.WriteLine($"{method,-14} AP {r.AveragePrecision:F4}  AUROC {r.Auroc:F4}  FPR95 {r.FprAtTpr:F4}");
        Assert.True(baseRate > 0.001, $"debris covers {baseRate:P3} of pixels");
        Assert.All(results, r => Assert.True(r.Value.AveragePrecision > 20 * baseRate, $"{r.Key}: AP {r.Value.AveragePrecision:F4} vs base rate {baseRate:F4}"));
        // Standardizing per class is what lets one threshold fit every class: at 95% of debris found, SML flags clearly
        // fewer normal pixels than the raw max logit, which flags fewer than MSP. In AP, SML leads max logit only by ~0.01
        // here (reported, not asserted); the full method and max logit lead by clear margins.
        double msp = results[DemoFrameMetrics.Method.Msp].FprAtTpr, ml = results[DemoFrameMetrics.Method.MaxLogit].FprAtTpr;
        double sml = results[DemoFrameMetrics.Method.Sml].FprAtTpr;
        double apMsp = results[DemoFrameMetrics.Method.Msp].AveragePrecision, apMl = results[DemoFrameMetrics.Method.MaxLogit].AveragePrecision;
        double apSml = results[DemoFrameMetrics.Method.Sml].AveragePrecision, apFull = results[DemoFrameMetrics.Method.SmlFullNarrow].AveragePrecision;
        Assert.True(apFull > apMl + 0.01 && apMl > apMsp + 0.02,
            $"AP: full {apFull:F4}, SML {apSml:F4}, max logit {apMl:F4}, MSP {apMsp:F4}");
        Assert.True(sml < 0.75 * ml && ml < 0.85 * msp, $"FPR at 95% TPR: SML {sml:F4}, max logit {ml:F4}, MSP {msp:F4}");
    }

    [Fact]
    public void UnfamiliarInputGetsNeutralLogitsFarBelowEveryClassLevel()
    {
        // A flat colour no scene contains: every radial unit fades, so without a bias every logit is near 0.
        var frame = new ApronFrame(256, 128, new byte[256 * 128 * 3], new byte[256 * 128]);
        for (int i = 0; i < 256 * 128; i++) { frame.Rgb[3 * i] = 230; frame.Rgb[3 * i + 1] = 20; frame.Rgb[3 * i + 2] = 230; }
        var logits = fixture.Model.Logits(frame, out _, out _);
        float worst = 0;
        foreach (float v in logits) worst = Math.Max(worst, Math.Abs(v));
        double lowestMean = fixture.Result.Statistics.Classes.Min(c => c.Mean);
        output.WriteLine($"largest |logit| on a flat magenta frame: {worst:F4}; lowest class mean max logit {lowestMean:F3}");
        Assert.True(worst < 0.25 * lowestMean, $"|logit| up to {worst:F4} vs lowest class mean {lowestMean:F3}");
    }

    [Fact]
    public void AveragePrecisionOfAPerfectAndAReversedRankingAreOneAndTheBaseRateOrBelow()
    {
        // Hand-computed: positives ranked 1st and 3rd of 4 give (1/1 + 2/3) / 2.
        Assert.Equal((1 + 2.0 / 3) / 2, DemoEvaluation.AveragePrecision([4f, 3f, 2f, 1f], [true, false, true, false]), 12);
        Assert.Equal(1.0, DemoEvaluation.AveragePrecision([4f, 3f, 2f, 1f], [true, true, false, false]), 12);
        // All tied: precision is the base rate.
        Assert.Equal(0.25, DemoEvaluation.AveragePrecision([1f, 1f, 1f, 1f], [true, false, false, false]), 12);
    }
}
