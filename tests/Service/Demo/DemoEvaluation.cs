using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Demo;

/// <summary>Measurements of the demo model used by the demo tests: accuracy, max-logit statistics, pixel AP.</summary>
internal static class DemoEvaluation
{
    public sealed record LogitMap(float[] Logits, int Classes, int Height, int Width)
    {
        public int Pixels => Height * Width;

        public (int Class, float MaxLogit, float Msp) At(int p)
        {
            int best = 0;
            float max = float.NegativeInfinity;
            for (int c = 0; c < Classes; c++)
            {
                float v = Logits[c * Pixels + p];
                if (v > max) { max = v; best = c; }
            }
            double sum = 0;
            for (int c = 0; c < Classes; c++) sum += Math.Exp(Logits[c * Pixels + p] - max);
            return (best, max, (float)(1 / sum));
        }
    }

    public static LogitMap Run(DemoModel model, ApronFrame frame)
    {
        var logits = model.Logits(frame, out int h, out int w);
        return new LogitMap(logits, model.ClassCount, h, w);
    }

    /// <summary>Pixel accuracy at logit resolution against the majority label of each 4×4 cell.</summary>
    public static double Accuracy(DemoModel model, IReadOnlyList<ApronFrame> frames)
    {
        long right = 0, total = 0;
        foreach (var f in frames)
        {
            var map = Run(model, f);
            var cells = DemoFeatures.CellLabels(f.Labels, f.Height, f.Width, ApronClasses.Count);
            for (int p = 0; p < map.Pixels; p++)
            {
                if (cells[p] >= ApronClasses.Count) continue;
                total++;
                if (map.At(p).Class == cells[p]) right++;
            }
        }
        return (double)right / total;
    }

    /// <summary>Per predicted class: count, mean and std of the max logit (population std).</summary>
    public static (long Count, double Mean, double Std)[] MaxLogitStatistics(DemoModel model, IReadOnlyList<ApronFrame> frames)
    {
        var n = new long[model.ClassCount];
        var s = new double[model.ClassCount];
        var s2 = new double[model.ClassCount];
        foreach (var f in frames)
        {
            var map = Run(model, f);
            for (int p = 0; p < map.Pixels; p++)
            {
                var (c, ml, _) = map.At(p);
                n[c]++; s[c] += ml; s2[c] += (double)ml * ml;
            }
        }
        var result = new (long, double, double)[model.ClassCount];
        for (int c = 0; c < result.Length; c++)
        {
            double mean = n[c] == 0 ? 0 : s[c] / n[c];
            result[c] = (n[c], mean, n[c] == 0 ? 0 : Math.Sqrt(Math.Max(0, s2[c] / n[c] - mean * mean)));
        }
        return result;
    }

    public enum Score { Msp, MaxLogit, Sml }

    /// <summary>
    /// Pixel AP of an anomaly score (higher = more anomalous) over debris frames, scores repeated over each 4×4 cell
    /// (nearest upsampling), ignore pixels (255) and pixels outside the logit grid skipped. Tied scores enter together.
    /// </summary>
    public static double AveragePrecision(DemoModel model, IReadOnlyList<ApronDebrisFrame> frames, Score score,
        IReadOnlyList<(double Mean, double Std)> statistics)
    {
        var scores = new List<float>();
        var positives = new List<bool>();
        foreach (var df in frames)
        {
            var f = df.Frame;
            var map = Run(model, f);
            var cellScore = new float[map.Pixels];
            for (int p = 0; p < map.Pixels; p++)
            {
                var (c, ml, msp) = map.At(p);
                cellScore[p] = score switch
                {
                    Score.Msp => -msp,
                    Score.MaxLogit => -ml,
                    _ => (float)(-(ml - statistics[c].Mean) / Math.Max(statistics[c].Std, 1e-6)),
                };
            }
            for (int y = 0; y < map.Height * DemoFeatures.Stride; y++)
                for (int x = 0; x < map.Width * DemoFeatures.Stride; x++)
                {
                    byte m = df.AnomalyMask[y * f.Width + x];
                    if (m > 1) continue;
                    scores.Add(cellScore[(y / DemoFeatures.Stride) * map.Width + x / DemoFeatures.Stride]);
                    positives.Add(m == 1);
                }
        }
        return AveragePrecision(scores.ToArray(), positives.ToArray());
    }

    public static double AveragePrecision(float[] scores, bool[] positive)
    {
        var order = new int[scores.Length];
        for (int i = 0; i < order.Length; i++) order[i] = i;
        var keys = (float[])scores.Clone();
        Array.Sort(keys, order);
        long totalPositive = 0;
        foreach (var p in positive) if (p) totalPositive++;
        if (totalPositive == 0) return double.NaN;
        double ap = 0;
        long tp = 0, seen = 0;
        int i2 = order.Length - 1;
        while (i2 >= 0)
        {
            float v = keys[i2];
            long groupTp = 0, group = 0;
            while (i2 >= 0 && keys[i2] == v) { if (positive[order[i2]]) groupTp++; group++; i2--; }
            tp += groupTp;
            seen += group;
            ap += (double)groupTp / totalPositive * ((double)tp / seen);
        }
        return ap;
    }
}
