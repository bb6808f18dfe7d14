using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Evaluation;

/// <summary>Distinct score thresholds from highest to lowest, each with the positives and negatives scoring exactly there.</summary>
internal interface IScoreGroups
{
    bool Next(out double threshold, out long positives, out long negatives);
    void Rewind();
}

/// <summary>
/// Turns tied score groups into the pixel metrics. Shared by the exact and the histogram mode so both define
/// the metrics identically: ROC points only at distinct thresholds, AUROC by trapezoids between them (ties count ½),
/// AP = Σ (R_n − R_{n−1}) · P_n over distinct thresholds.
/// </summary>
internal static class ScoreGroupWalk
{
    public static void ValidateTargets(double tprTarget, double? fprTarget)
    {
        if (!(tprTarget > 0 && tprTarget <= 1))
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The TPR target must be in (0, 1]; got {tprTarget}.");
        if (fprTarget is double f && !(f >= 0 && f <= 1))
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The FPR target must be in [0, 1]; got {f}.");
    }

    public static void RequireBothClasses(long positives, long negatives)
    {
        if (positives == 0 || negatives == 0)
            throw new ScoringInputException(EvaluationErrorCodes.OneClass,
                $"Pixel metrics need anomaly and in-distribution pixels; got {positives} anomaly and {negatives} in-distribution.");
    }

    /// <param name="noneThreshold">A threshold above every score (flags nothing): the operating point (0, 0).</param>
    public static PixelMetricsResult Run<T>(ref T groups, long P, long N, double tprTarget, double? fprTarget,
        bool curves, double noneThreshold) where T : struct, IScoreGroups
    {
        long tp = 0, fp = 0, groupCount = 0;
        Int128 aurocTwice = 0; // Σ ΔFP · (TP_k + TP_{k−1}); exact in integers
        double ap = 0;
        double fprAtTpr = double.NaN, thrAtTpr = double.NaN;
        bool tprReached = false;
        double tprAtFpr = 0, thrAtFpr = noneThreshold;
        double fprLimit = fprTarget ?? -1;
        bool fprOpen = fprTarget is not null;
        // A double ratio compared with the target: division is correctly rounded, so a ratio equal to the
        // decimal target (19/20 vs 0.95) compares equal.
        while (groups.Next(out double thr, out long dp, out long dn))
        {
            groupCount++;
            long tpPrev = tp;
            tp += dp;
            fp += dn;
            aurocTwice += (Int128)dn * (tp + tpPrev);
            if (dp > 0) ap += dp * ((double)tp / (tp + fp));
            if (!tprReached && (double)tp / P >= tprTarget)
            {
                tprReached = true;
                fprAtTpr = (double)fp / N;
                thrAtTpr = thr;
            }
            if (fprOpen)
            {
                // FP only grows, so once over the limit it stays over.
                if ((double)fp / N <= fprLimit)
                {
                    tprAtFpr = (double)tp / P;
                    thrAtFpr = thr;
                }
                else fprOpen = false;
            }
        }
        double auroc = (double)aurocTwice / (2.0 * P * N);
        var result = new PixelMetricsResult(P, N, auroc, ap / P, fprAtTpr, tprTarget, thrAtTpr,
            fprTarget is null ? null : tprAtFpr, fprTarget, fprTarget is null ? null : thrAtFpr);
        if (!curves) return result;
        groups.Rewind();
        return result with { Curves = SampleCurves(ref groups, P, N, groupCount, noneThreshold) };
    }

    private static PixelCurves SampleCurves<T>(ref T groups, long P, long N, long groupCount, double noneThreshold)
        where T : struct, IScoreGroups
    {
        // Points are indexed 0..G (0 = nothing flagged); take M of them spread evenly, ends included.
        int m = (int)Math.Min(groupCount + 1, PixelCurves.MaxPoints);
        var roc = new List<RocPoint>(m) { new(0, 0, noneThreshold) };
        var pr = new List<PrecisionRecallPoint>(m) { new(0, 1, noneThreshold) };
        int j = 1;
        long nextIndex = m > 1 ? SampleIndex(1, m, groupCount) : long.MaxValue;
        long tp = 0, fp = 0, k = 0;
        while (groups.Next(out double thr, out long dp, out long dn))
        {
            k++;
            tp += dp;
            fp += dn;
            if (k != nextIndex) continue;
            roc.Add(new RocPoint((double)fp / N, (double)tp / P, thr));
            pr.Add(new PrecisionRecallPoint((double)tp / P, (double)tp / (tp + fp), thr));
            j++;
            nextIndex = j < m ? SampleIndex(j, m, groupCount) : long.MaxValue;
        }
        return new PixelCurves(roc, pr);
    }

    // Strictly increasing in j when m − 1 ≤ g, and hits g at j = m − 1.
    private static long SampleIndex(int j, int m, long g) => (long)Math.Round((double)j * g / (m - 1));
}
