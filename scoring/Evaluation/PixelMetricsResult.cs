namespace Strayspot.Scoring.Evaluation;

/// <summary>
/// Pixel-level detection quality of an anomaly score (higher = more anomalous) against labels
/// (1 = anomaly = positive, 0 = in-distribution = negative).
/// A pixel is flagged when <c>score &gt;= threshold</c>. <see cref="ThresholdAtTpr"/> and
/// <see cref="ThresholdAtFpr"/> are the thresholds that reach the reported operating points; a threshold
/// that flags nothing is the smallest value above every score seen.
/// </summary>
/// <param name="FprAtTpr">False-positive rate at the highest threshold whose true-positive rate is at least <paramref name="TprTarget"/>.</param>
/// <param name="TprAtFpr">Largest true-positive rate whose false-positive rate is at most <paramref name="FprTarget"/> (null when no target was asked).</param>
public sealed record PixelMetricsResult(
    long Positives,
    long Negatives,
    double Auroc,
    double AveragePrecision,
    double FprAtTpr,
    double TprTarget,
    double ThresholdAtTpr,
    double? TprAtFpr,
    double? FprTarget,
    double? ThresholdAtFpr)
{
    /// <summary>Downsampled ROC and PR curves for plots (null unless asked for).</summary>
    public PixelCurves? Curves { get; init; }

    /// <summary>
    /// Guaranteed worst-case differences from the exact computation; set by the histogram (streaming) mode,
    /// null for the exact mode.
    /// </summary>
    public StreamingErrorBounds? ErrorBounds { get; init; }
}

/// <summary>One ROC point: rates reached when flagging <c>score &gt;= Threshold</c>.</summary>
public readonly record struct RocPoint(double Fpr, double Tpr, double Threshold);

/// <summary>One precision-recall point; the first point is the conventional (recall 0, precision 1).</summary>
public readonly record struct PrecisionRecallPoint(double Recall, double Precision, double Threshold);

/// <summary>At most <see cref="MaxPoints"/> points of each curve, sampled evenly over the distinct thresholds,
/// always including both ends.</summary>
public sealed record PixelCurves(IReadOnlyList<RocPoint> Roc, IReadOnlyList<PrecisionRecallPoint> PrecisionRecall)
{
    public const int MaxPoints = 1000;
}

/// <summary>
/// How far a histogram result can be from the exact result on the same pixels (absolute, worst case).
/// Binning keeps the order of any two scores in different bins and turns scores sharing a bin into ties, so:
/// AUROC moves by at most ½ × (fraction of positive–negative pairs that share a bin);
/// AP moves, per bin holding positives, by at most (its recall step) × (spread of precision reachable inside the bin);
/// FPR at the TPR target can only be higher, by at most the negatives in the bin where the target is crossed / N;
/// TPR at the FPR target can only be lower, by at most the positives in the next bin / P.
/// </summary>
public sealed record StreamingErrorBounds(double Auroc, double AveragePrecision, double FprAtTpr, double? TprAtFpr);
