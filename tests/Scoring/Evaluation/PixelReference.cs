namespace Strayspot.Tests.Scoring.Evaluation;

/// <summary>Slow, obviously-correct definitions used as test oracles (quadratic; small data only).</summary>
internal static class PixelReference
{
    /// <summary>Probability that a random anomaly pixel outscores a random in-distribution one, ties counting ½.</summary>
    public static double PairwiseAuroc(float[] s, byte[] l)
    {
        double wins = 0;
        long pairs = 0;
        for (int i = 0; i < s.Length; i++)
        {
            if (l[i] != 1) continue;
            for (int j = 0; j < s.Length; j++)
            {
                if (l[j] != 0) continue;
                pairs++;
                wins += s[i] > s[j] ? 1 : s[i] == s[j] ? 0.5 : 0;
            }
        }
        return wins / pairs;
    }

    /// <summary>Counts flagged pixels (score ≥ t) directly at every distinct score.</summary>
    public static List<(double Thr, long Tp, long Fp)> Points(float[] s, byte[] l)
    {
        var thresholds = new SortedSet<float>(s.Where((_, i) => l[i] <= 1)).Reverse();
        var list = new List<(double, long, long)>();
        foreach (float t in thresholds)
        {
            long tp = 0, fp = 0;
            for (int i = 0; i < s.Length; i++)
            {
                if (s[i] < t) continue;
                if (l[i] == 1) tp++; else if (l[i] == 0) fp++;
            }
            list.Add((t, tp, fp));
        }
        return list;
    }

    public static double AveragePrecision(float[] s, byte[] l)
    {
        long P = l.Count(x => x == 1);
        double ap = 0, prevRecall = 0;
        foreach (var (_, tp, fp) in Points(s, l))
        {
            double r = (double)tp / P;
            ap += (r - prevRecall) * tp / (tp + fp);
            prevRecall = r;
        }
        return ap;
    }

    public static (double Fpr, double Thr) FprAtTpr(float[] s, byte[] l, double target)
    {
        long P = l.Count(x => x == 1), N = l.Count(x => x == 0);
        foreach (var (t, tp, fp) in Points(s, l))
            if ((double)tp / P >= target) return ((double)fp / N, t);
        throw new InvalidOperationException("unreachable: the lowest threshold has TPR 1");
    }

    public static double TprAtFpr(float[] s, byte[] l, double target)
    {
        long P = l.Count(x => x == 1), N = l.Count(x => x == 0);
        double best = 0;
        foreach (var (_, tp, fp) in Points(s, l))
            if ((double)fp / N <= target) best = Math.Max(best, (double)tp / P);
        return best;
    }

    /// <summary>Random labelled scores: anomalies shifted up by <paramref name="shift"/>, rounded to <paramref name="decimals"/> (ties), some ignore pixels.</summary>
    public static (float[] S, byte[] L) Random(int n, int seed, int decimals = 6, double shift = 0.4, double ignoreRate = 0.05)
    {
        var rng = new Random(seed);
        var s = new float[n];
        var l = new byte[n];
        for (int i = 0; i < n; i++)
        {
            double u = rng.NextDouble();
            l[i] = u < ignoreRate ? (byte)255 : rng.NextDouble() < 0.3 ? (byte)1 : (byte)0;
            s[i] = (float)Math.Round(rng.NextDouble() + (l[i] == 1 ? shift : 0), decimals);
        }
        // Guarantee both classes even for tiny n.
        l[0] = 1;
        l[^1] = 0;
        return (s, l);
    }
}
