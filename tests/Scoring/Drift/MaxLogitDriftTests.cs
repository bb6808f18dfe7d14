using Strayspot.Scoring.Drift;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Tests.Scoring.Drift;

public class MaxLogitDriftTests
{
    private static readonly ClassStatistics Calibration = new([new("a", 10_000, 5, 1), new("b", 10_000, 2, 0.5)]);

    private static (float[] MaxLogit, ushort[] Class) Frame(Random rng, int n, double shiftA, double shiftB)
    {
        var m = new float[n];
        var c = new ushort[n];
        for (int i = 0; i < n; i++)
        {
            c[i] = (ushort)(rng.NextDouble() < 0.7 ? 0 : 1);
            double z = Math.Sqrt(-2 * Math.Log(1 - rng.NextDouble())) * Math.Cos(Math.Tau * rng.NextDouble());
            m[i] = c[i] == 0 ? (float)(5 + shiftA + z) : (float)(2 + shiftB + 0.5 * z);
        }
        return (m, c);
    }

    [Fact]
    public void Summing_runs_of_one_class_gives_the_per_pixel_sums_bit_for_bit()
    {
        // Reference: each pixel added to its class's sums in pixel order, as the watch did before it summed runs.
        var rng = new Random(11);
        const int classes = 3, n = 4099;
        var stats = new ClassStatistics([new("a", 10_000, 5, 1), new("b", 10_000, 2, 0.5), new("c", 10_000, -1, 2)]);
        var drift = new MaxLogitDrift(stats, halfLifeFrames: double.PositiveInfinity);
        var count = new double[classes];
        var sum = new double[classes];
        var squares = new double[classes];
        for (int f = 0; f < 3; f++)
        {
            var m = new float[n];
            var c = new ushort[n];
            for (int i = 0; i < n; )
            {
                // Runs of 1–40 pixels, some of a class the calibration does not know (skipped).
                int run = 1 + rng.Next(f == 0 ? 1 : 40);
                ushort k = (ushort)rng.Next(classes + 1);
                for (int j = 0; j < run && i < n; j++, i++)
                {
                    c[i] = k;
                    m[i] = (float)(rng.NextDouble() * 20 - 7);
                }
            }
            drift.Observe(m, c);
            var frameCount = new long[classes];
            var frameSum = new double[classes];
            var frameSquares = new double[classes];
            for (int i = 0; i < n; i++)
            {
                if (c[i] >= classes) continue;
                double v = m[i];
                frameCount[c[i]]++;
                frameSum[c[i]] += v;
                frameSquares[c[i]] += v * v;
            }
            // A frame's sums join the running ones once per frame (weight 1: no decay).
            for (int k = 0; k < classes; k++)
            {
                count[k] = 1.0 * count[k] + frameCount[k];
                sum[k] = 1.0 * sum[k] + frameSum[k];
                squares[k] = 1.0 * squares[k] + frameSquares[k];
            }
        }
        var report = drift.Report();
        for (int k = 0; k < classes; k++)
        {
            double mean = sum[k] / count[k];
            Assert.Equal(count[k], report.Classes[k].PixelWeight);
            Assert.Equal(mean, report.Classes[k].Mean);
            Assert.Equal(Math.Sqrt(Math.Max(0, squares[k] / count[k] - mean * mean)), report.Classes[k].Std);
        }
    }

    [Fact]
    public void Without_decay_the_statistics_equal_a_two_pass_computation_over_every_pixel()
    {
        var rng = new Random(3);
        var drift = new MaxLogitDrift(Calibration, halfLifeFrames: double.PositiveInfinity);
        var all = new List<(float, ushort)>();
        for (int f = 0; f < 7; f++)
        {
            var (m, c) = Frame(rng, 500 + 37 * f, 0.3 * f, -0.1 * f);
            drift.Observe(m, c);
            for (int i = 0; i < m.Length; i++) all.Add((m[i], c[i]));
        }
        var report = drift.Report();
        for (int k = 0; k < 2; k++)
        {
            var values = all.Where(p => p.Item2 == k).Select(p => (double)p.Item1).ToList();
            double mean = values.Average();
            double std = Math.Sqrt(values.Sum(v => (v - mean) * (v - mean)) / values.Count);
            Assert.Equal(values.Count, report.Classes[k].PixelWeight);
            Assert.Equal(mean, report.Classes[k].Mean, 1e-9 * Math.Abs(mean));
            Assert.Equal(std, report.Classes[k].Std, 1e-9 * std);
            Assert.Equal((mean - Calibration.Classes[k].Mean) / Calibration.Classes[k].Std, report.Classes[k].Shift, 1e-9);
        }
    }

    [Fact]
    public void With_decay_each_frame_weighs_half_as_much_per_half_life_as_a_weighted_two_pass_computation_says()
    {
        var rng = new Random(5);
        var drift = new MaxLogitDrift(Calibration, halfLifeFrames: 2);
        var frames = Enumerable.Range(0, 6).Select(f => Frame(rng, 300, f, 0)).ToList();
        foreach (var (m, c) in frames) drift.Observe(m, c);
        double w = 0, s = 0;
        for (int f = 0; f < frames.Count; f++)
        {
            double weight = Math.Pow(0.5, (frames.Count - 1 - f) / 2.0);
            var (m, c) = frames[f];
            for (int i = 0; i < m.Length; i++)
                if (c[i] == 0) { w += weight; s += weight * m[i]; }
        }
        Assert.Equal(s / w, drift.Report().Classes[0].Mean, 1e-9 * (s / w));
    }

    [Fact]
    public void Frames_like_the_calibration_stay_quiet_and_a_shifted_fleet_raises_the_warning()
    {
        var rng = new Random(7);
        var drift = new MaxLogitDrift(Calibration, halfLifeFrames: 20);
        for (int f = 0; f < 30; f++) { var (m, c) = Frame(rng, 2000, 0, 0); drift.Observe(m, c); }
        var quiet = drift.Report();
        Assert.False(quiet.Warning);
        Assert.True(quiet.Overall < 0.1, $"overall {quiet.Overall}");
        for (int f = 0; f < 60; f++) { var (m, c) = Frame(rng, 2000, -2.0, -0.8); drift.Observe(m, c); }
        var shifted = drift.Report();
        Assert.True(shifted.Warning, $"overall {shifted.Overall}");
        Assert.InRange(shifted.Classes[0].Shift, -2.1, -1.8);
    }
}
