using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Tests.Scoring.Standardization;

public class ClassStatisticsAccumulatorTests
{
    private static (float[] Logit, ushort[] Cls, byte[] Label) Pixels(int n, int classes, int seed)
    {
        var rng = new Random(seed);
        var logit = new float[n];
        var cls = new ushort[n];
        var label = new byte[n];
        for (int i = 0; i < n; i++)
        {
            cls[i] = (ushort)rng.Next(classes);
            // Large offset, small spread: the case where a one-pass sum-of-squares loses digits.
            logit[i] = (float)(1000 + cls[i] * 3 + rng.NextDouble() * 2 - 1);
            label[i] = rng.Next(10) == 0 ? (byte)255 : rng.Next(4) == 0 ? (byte)rng.Next(classes) : (byte)cls[i];
        }
        return (logit, cls, label);
    }

    /// <summary>Plain two-pass float64 mean and population std of the kept pixels of class c.</summary>
    private static (long N, double Mean, double Std) TwoPass(float[] logit, ushort[] cls, int c, Func<int, bool> keep)
    {
        long n = 0; double sum = 0;
        for (int i = 0; i < logit.Length; i++) if (cls[i] == c && keep(i)) { n++; sum += logit[i]; }
        double mean = sum / n, ss = 0;
        for (int i = 0; i < logit.Length; i++) if (cls[i] == c && keep(i)) { double d = logit[i] - mean; ss += d * d; }
        return (n, mean, Math.Sqrt(ss / n));
    }

    private static void AssertRelative(double expected, double actual, double tolerance = 1e-9) =>
        Assert.True(Math.Abs(expected - actual) <= tolerance * Math.Abs(expected), $"expected {expected:R}, got {actual:R}");

    [Theory]
    [InlineData(1)]
    [InlineData(7)]
    public void UnevenSplitsMergedEqualTwoPassReference(int seed)
    {
        const int classes = 5;
        var (logit, cls, _) = Pixels(20_000, classes, seed);
        var rng = new Random(seed + 100);
        var total = new ClassStatisticsAccumulator(classes);
        int start = 0;
        while (start < logit.Length)
        {
            int len = Math.Min(logit.Length - start, 1 + rng.Next(3000));
            var part = new ClassStatisticsAccumulator(classes);
            // Each part also gets several Adds of its own, of uneven length.
            int mid = start + len / 3;
            part.Add(logit.AsSpan(start, mid - start), cls.AsSpan(start, mid - start));
            part.Add(logit.AsSpan(mid, start + len - mid), cls.AsSpan(mid, start + len - mid));
            total.Merge(part);
            start += len;
        }
        var stats = total.ToStatistics(Enumerable.Range(0, classes).Select(i => $"k{i}").ToList());
        for (int c = 0; c < classes; c++)
        {
            var (n, mean, std) = TwoPass(logit, cls, c, _ => true);
            Assert.Equal(n, stats.Classes[c].Count);
            AssertRelative(mean, stats.Classes[c].Mean);
            AssertRelative(std, stats.Classes[c].Std);
        }
    }

    [Fact]
    public void GroundTruthFilterKeepsOnlyCorrectPixelsAndSkipsIgnore()
    {
        const int classes = 4;
        var (logit, cls, label) = Pixels(10_000, classes, 3);
        var acc = new ClassStatisticsAccumulator(classes);
        acc.Add(logit.AsSpan(0, 4000), cls.AsSpan(0, 4000), label.AsSpan(0, 4000), 255);
        acc.Add(logit.AsSpan(4000), cls.AsSpan(4000), label.AsSpan(4000), 255);
        for (int c = 0; c < classes; c++)
        {
            var (n, mean, std) = TwoPass(logit, cls, c, i => label[i] != 255 && label[i] == cls[i]);
            Assert.Equal(n, acc.Count(c));
            AssertRelative(mean, acc.Mean(c));
            AssertRelative(std, Math.Sqrt(acc.M2(c) / acc.Count(c)));
        }
        // Wide labels give the same answer.
        var wide = new ClassStatisticsAccumulator(classes);
        wide.Add(logit, cls, label.Select(b => (ushort)b).ToArray(), 255);
        for (int c = 0; c < classes; c++) Assert.Equal(acc.Count(c), wide.Count(c));
    }

    [Fact]
    public void StateRoundTripAndMergeOrderAreDeterministic()
    {
        var (logit, cls, _) = Pixels(3000, 3, 5);
        ClassStatisticsAccumulator Run()
        {
            var acc = new ClassStatisticsAccumulator(3);
            for (int f = 0; f < 3; f++)
            {
                var frame = new ClassStatisticsAccumulator(3);
                frame.Add(logit.AsSpan(f * 1000, 1000), cls.AsSpan(f * 1000, 1000));
                var (n, m, m2) = frame.ExportState();
                acc.Merge(ClassStatisticsAccumulator.FromState(n, m, m2));
            }
            return acc;
        }
        var a = Run().ExportState();
        var b = Run().ExportState();
        Assert.Equal(a.Mean, b.Mean);
        Assert.Equal(a.M2, b.M2);
    }

    [Fact]
    public void BadInputIsRefusedWithCodes()
    {
        var acc = new ClassStatisticsAccumulator(2);
        Assert.Equal(ScoringErrorCodes.StatisticsMismatch,
            Assert.Throws<ScoringInputException>(() => acc.Add([1f], [(ushort)2])).Code);
        Assert.Equal(ScoringErrorCodes.LogitsNonFinite,
            Assert.Throws<ScoringInputException>(() => acc.Add([float.NaN], [(ushort)0])).Code);
        Assert.Equal(ScoringErrorCodes.FrameSize,
            Assert.Throws<ScoringInputException>(() => acc.Add([1f, 2f], [(ushort)0])).Code);
        Assert.Equal(ScoringErrorCodes.StatisticsMismatch,
            Assert.Throws<ScoringInputException>(() => acc.Merge(new ClassStatisticsAccumulator(3))).Code);
    }

    [Fact]
    public void EmptyClassReportsZeroCount()
    {
        var acc = new ClassStatisticsAccumulator(2);
        acc.Add([2f, 4f], [(ushort)0, (ushort)0]);
        var s = acc.ToStatistics(["a", "b"]);
        Assert.Equal(0, s.Classes[1].Count);
        Assert.Equal(3.0, s.Classes[0].Mean);
        Assert.Equal(1.0, s.Classes[0].Std); // population std of {2, 4}
    }
}
