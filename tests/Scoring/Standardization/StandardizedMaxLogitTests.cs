using FsCheck.Xunit;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Tests.Scoring.Standardization;

public class StandardizedMaxLogitTests
{
    private static ClassStatistics Stats(long minimumCount, params (long Count, double Mean, double Std)[] classes) =>
        new(classes.Select((c, i) => new ClassStatistic($"k{i}", c.Count, c.Mean, c.Std)).ToList(), minimumCount);

    private static float[] Apply(StandardizedMaxLogit sml, float[] maxLogit, ushort[] cls)
    {
        var o = new float[maxLogit.Length];
        sml.Apply(maxLogit, cls, o);
        return o;
    }

    [Fact]
    public void Standardizes_with_the_predicted_class_worked_by_hand()
    {
        var sml = new StandardizedMaxLogit(Stats(100, (500, 10, 2), (400, -4, 0.5), (1000, 0, 4)));
        Assert.Empty(sml.FallbackClasses);
        // Enough pixels for the vector body and the scalar tail: pattern repeats every 3.
        var x = new float[19];
        var c = new ushort[19];
        var expected = new float[19];
        float[] xs = [14f, -5f, 2f];
        float[] es = [(14f - 10f) / 2f, (-5f + 4f) / 0.5f, 2f / 4f]; // 2, −2, 0.5
        for (int i = 0; i < x.Length; i++) { x[i] = xs[i % 3]; c[i] = (ushort)(i % 3); expected[i] = es[i % 3]; }
        Assert.Equal(expected, Apply(sml, x, c));
    }

    // Worked by hand: qualifying classes (n=100, mean 2, std 1) and (n=300, mean 6, std 3).
    // Pooled mean = (200 + 1800) / 400 = 5; pooled variance = (100·(1 + 9) + 300·(9 + 1)) / 400 = 10.
    [Fact]
    public void Fallback_uses_count_weighted_pooled_mean_and_total_variance()
    {
        var sml = new StandardizedMaxLogit(Stats(100, (100, 2, 1), (99, 50, 5), (300, 6, 3), (5000, 7, 0)));
        Assert.Equal(new[] { 1, 3 }, sml.FallbackClasses);
        Assert.Equal(5.0, sml.PooledMean, 12);
        Assert.Equal(Math.Sqrt(10), sml.PooledStd, 12);
        var o = Apply(sml, [5f + (float)Math.Sqrt(10), 5f, 3f], [1, 3, 0]);
        Assert.Equal(1f, o[0], 5);
        Assert.Equal(0f, o[1], 5);
        Assert.Equal(1f, o[2], 5);
    }

    [Fact]
    public void No_qualifying_class_is_refused()
    {
        var e = Assert.Throws<ScoringInputException>(() => new StandardizedMaxLogit(Stats(100, (99, 1, 1), (1000, 1, 0))));
        Assert.Equal(ScoringErrorCodes.StatisticsFormat, e.Code);
        Assert.Contains("100", e.Message);
    }

    [Fact]
    public void Class_count_mismatch_names_both_numbers()
    {
        var stats = Stats(1, (10, 0, 1), (10, 0, 1), (10, 0, 1));
        var e = Assert.Throws<ScoringInputException>(() => new StandardizedMaxLogit(stats, 19));
        Assert.Equal(ScoringErrorCodes.StatisticsMismatch, e.Code);
        Assert.Contains("19", e.Message);
        Assert.Contains("3", e.Message);

        var sml = new StandardizedMaxLogit(stats);
        var cls = new ushort[20];
        cls[13] = 7;
        var e2 = Assert.Throws<ScoringInputException>(() => sml.Apply(new float[20], cls, new float[20]));
        Assert.Equal(ScoringErrorCodes.StatisticsMismatch, e2.Code);
        Assert.Contains("Pixel 13 has class 7", e2.Message);
        Assert.Contains("describe 3 classes", e2.Message);
    }

    [Fact]
    public void Unequal_map_lengths_are_refused()
    {
        var sml = new StandardizedMaxLogit(Stats(1, (10, 0, 1)));
        var e = Assert.Throws<ScoringInputException>(() => sml.Apply(new float[4], new ushort[3], new float[4]));
        Assert.Contains("3 class indices", e.Message);
    }

    [Fact]
    public void Extreme_but_finite_inputs_never_give_NaN_or_infinity()
    {
        var sml = new StandardizedMaxLogit(Stats(1, (10, -3e38, 1e-6), (10, 3e38, 1e-6), (10, 0, 1e300), (10, 1e300, 1)));
        var x = new float[40];
        var c = new ushort[40];
        for (int i = 0; i < x.Length; i++)
        {
            x[i] = (i % 4) switch { 0 => float.MaxValue, 1 => float.MinValue, 2 => 0f, _ => float.Epsilon };
            c[i] = (ushort)(i / 4 % 4);
        }
        foreach (float v in Apply(sml, x, c)) Assert.True(float.IsFinite(v), $"got {v}");
    }

    // Property: standardizing and then undoing returns the max logit (up to float rounding).
    [Property(MaxTest = 300)]
    public bool Undo_after_apply_returns_the_max_logit(int[] rawLogits, int[] rawClasses, int meanSeed, byte stdSeed)
    {
        int classes = 1 + (rawClasses.Length % 7);
        var stats = Stats(10, Enumerable.Range(0, classes)
            .Select(k => ((long)(k % 3 == 2 ? 5 : 50), (meanSeed % 10_000) / 100.0 + k, 0.01 + (stdSeed + 7 * k) / 16.0)).ToArray());
        var sml = new StandardizedMaxLogit(stats);
        var x = rawLogits.Select(v => (v % 1_000_000) / 1000f).ToArray();
        var c = rawLogits.Select((_, i) => (ushort)(rawClasses.Length == 0 ? 0 : Math.Abs(rawClasses[i % rawClasses.Length] % classes))).ToArray();
        var s = Apply(sml, x, c);
        var back = new float[x.Length];
        sml.Undo(s, c, back);
        for (int i = 0; i < x.Length; i++)
            if (Math.Abs(back[i] - x[i]) > 1e-4f * (1 + Math.Abs(x[i]) + Math.Abs(stats.Classes[c[i]].Mean)))
                return false;
        return true;
    }

    /// <summary>
    /// The one-pass anomaly score against the straightforward two-step reference (standardize, then negate) to the
    /// bit, signed zeros included: random values, values equal to a class mean (±0), values far beyond the float
    /// range after scaling (the clamp), fallback classes, and lengths on and off the vector width and past the
    /// parallel threshold; five classes, so the tables sit in registers.
    /// </summary>
    [Theory]
    [InlineData(1, 1)]
    [InlineData(37, 2)]
    [InlineData(300_001, 3)]
    public void Negated_pass_is_bit_equal_to_standardize_then_negate(int n, int seed)
    {
        var sml = new StandardizedMaxLogit(Stats(100, (500, 10, 2), (400, -4, 0.5), (5, 50, 5), (1000, 0, 1e-30), (800, 3.25, 0.1)));
        var rng = new Random(seed);
        var x = new float[n];
        var c = new ushort[n];
        for (int i = 0; i < n; i++)
        {
            c[i] = (ushort)rng.Next(5);
            x[i] = (i % 7) switch
            {
                0 => c[i] switch { 0 => 10f, 1 => -4f, 4 => 3.25f, _ => 0f },
                1 => (rng.Next(2) * 2 - 1) * float.MaxValue / (1 + rng.Next(3)),
                _ => (float)(40 * rng.NextDouble() - 20),
            };
        }
        var reference = Apply(sml, x, c);
        for (int i = 0; i < n; i++) reference[i] = -reference[i];
        var once = new float[n];
        sml.ApplyNegated(x, c, once);
        for (int i = 0; i < n; i++)
            Assert.True(BitConverter.SingleToInt32Bits(reference[i]) == BitConverter.SingleToInt32Bits(once[i]),
                $"pixel {i}: class {c[i]}, max logit {x[i]}: {reference[i]} vs {once[i]}");
        Assert.Contains(once, v => v == 0f && float.IsNegative(v));

        // The 16-pixel permute kernel against the 8-pixel gather kernel (both give the same bits, so flipping the
        // switch cannot disturb a test running beside this one).
        var gathered = new float[n];
        StandardizedMaxLogit.WideKernels = false;
        try { sml.Apply(x, c, gathered); }
        finally { StandardizedMaxLogit.WideKernels = true; }
        var permuted = Apply(sml, x, c);
        for (int i = 0; i < n; i++)
            Assert.True(BitConverter.SingleToInt32Bits(gathered[i]) == BitConverter.SingleToInt32Bits(permuted[i]), $"pixel {i}");
    }
}
