using FsCheck.Xunit;
using Strayspot.Scoring.Evaluation;

namespace Strayspot.Tests.Scoring.Evaluation;

public class PixelMetricsProperties
{
    // Generated inputs: small integer scores (many ties) and labels drawn from 0, 1 and 255.
    private static (float[] S, byte[] L) From(sbyte[] scores, bool[] anomaly, bool[] ignore)
    {
        int n = Math.Min(scores.Length, Math.Min(anomaly.Length, ignore.Length));
        var s = new float[n + 2];
        var l = new byte[n + 2];
        for (int i = 0; i < n; i++)
        {
            s[i] = scores[i] / 8f;
            l[i] = ignore[i] && i % 3 == 0 ? (byte)255 : anomaly[i] ? (byte)1 : (byte)0;
        }
        (s[n], l[n], s[n + 1], l[n + 1]) = (0.5f, 1, 0.25f, 0); // both classes always present
        return (s, l);
    }

    [Property(MaxTest = 200)]
    public bool Exact_auroc_equals_pairwise_probability(sbyte[] scores, bool[] anomaly, bool[] ignore)
    {
        var (s, l) = From(scores, anomaly, ignore);
        var m = new ExactPixelMetrics();
        m.Add(s, l);
        return Math.Abs(m.Compute().Auroc - PixelReference.PairwiseAuroc(s, l)) < 1e-12;
    }

    [Property(MaxTest = 200)]
    public bool Histogram_with_one_bin_per_integer_step_equals_exact(sbyte[] scores, bool[] anomaly, bool[] ignore)
    {
        // Scores are k/8 for k in −128..127: 256 bins of width 1/8 centred on them hold one value each.
        var (s, l) = From(scores, anomaly, ignore);
        var e = new ExactPixelMetrics();
        e.Add(s, l);
        var h = new StreamingPixelMetrics(-128.5f / 8, 127.5f / 8, 256);
        h.Add(s, l);
        var (a, b) = (e.Compute(0.9, 0.2), h.Compute(0.9, 0.2));
        return Math.Abs(a.Auroc - b.Auroc) < 1e-12 && Math.Abs(a.AveragePrecision - b.AveragePrecision) < 1e-12
            && a.FprAtTpr == b.FprAtTpr && a.TprAtFpr == b.TprAtFpr && h.Clamped == 0;
    }
}
