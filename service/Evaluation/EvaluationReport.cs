using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Evaluation;

namespace Strayspot.Service.Evaluation;

/// <summary>What an evaluation run does besides the defaults.</summary>
public sealed record EvaluationSettings
{
    /// <summary>Keep every pixel's score (exact metrics; memory grows with the data) instead of fixed-size histograms.</summary>
    public bool Exact { get; init; }
    /// <summary>TPR of the "FPR at TPR" column and, unless <see cref="TargetFpr"/> is set, of the operating point.</summary>
    public double TargetTpr { get; init; } = 0.95;
    /// <summary>When set, the operating point is chosen by this FPR instead of the TPR target.</summary>
    public double? TargetFpr { get; init; }
    /// <summary>FPR of the "TPR at FPR" column when no <see cref="TargetFpr"/> is given (common practice: 5%).</summary>
    public const double DefaultReportedFpr = 0.05;
    /// <summary>Write the recommended threshold into the model folder's profile.json as a new version.</summary>
    public bool WriteProfile { get; init; }
    /// <summary>Write the profile even when its threshold flags more than <see cref="OperatingTradeOff.MaxFlaggedOrdinaryShare"/> of ordinary pixels.</summary>
    public bool ForceProfile { get; init; }
    /// <summary>The clock of the new profile version (tests pin it).</summary>
    public DateTimeOffset? Now { get; init; }
    /// <summary>Histogram bins per method in the streaming mode.</summary>
    public int Bins { get; init; } = 1 << 16;

    public double ReportedFpr => TargetFpr ?? DefaultReportedFpr;
    public string TargetKind => TargetFpr is null ? "tpr" : "fpr";
    public double TargetValue => TargetFpr ?? TargetTpr;
}

/// <summary>One method's pixel metrics as reported (rates as fractions 0..1).</summary>
/// <param name="ThresholdAtTarget">Lowest score flagged (<c>score ≥ threshold</c>) at the chosen target.</param>
/// <param name="Bounds">Streaming mode only: worst-case distance of AUROC, AP, FPR@TPR, TPR@FPR from the exact values.</param>
public sealed record MethodRow(
    string Method, double Auroc, double AveragePrecision, double FprAtTpr, double TprTarget,
    double? TprAtFpr, double FprTarget, double ThresholdAtTarget, long Positives, long Negatives,
    long Clamped, StreamingErrorBounds? Bounds);

/// <summary>
/// The recommended threshold of the primary method. <see cref="MetricThreshold"/> follows the metrics' rule
/// (flag <c>score ≥ t</c>); <see cref="ProfileThreshold"/> is the same cut in the pipeline's rule (flag
/// <c>score &gt; t</c>), the value a profile stores. <see cref="AchievedTpr"/>/<see cref="AchievedFpr"/> are
/// re-counted exactly on every pixel with the profile threshold (also in the streaming mode).
/// </summary>
public sealed record OperatingPoint(
    string Method, string Target, double TargetValue, double MetricThreshold, float ProfileThreshold,
    double AchievedTpr, double AchievedFpr, long FlaggedPixels);

/// <summary>The largest false-positive region of a frame (PPV ≤ 0.25 among its labelled pixels).</summary>
public sealed record WorstRegion(int Left, int Top, int Width, int Height, long Area, float MeanScore, float MaxScore, double Ppv);

/// <summary>One frame at the recommended threshold.</summary>
/// <param name="FrameScore">Largest anomaly score of the primary method in the frame (threshold-free).</param>
public sealed record FrameRow(
    string Frame, float FrameScore, double FlaggedShare, long FlaggedPixels, long AnomalyPixels,
    int Regions, int FalsePositiveRegions, WorstRegion? WorstFalsePositive);

/// <summary>Segmentation quality of the predicted classes, closed-set and with flagged pixels taken out.</summary>
public sealed record SegmentationSummary(
    double ClosedSetMeanIoU, double OpenSetMeanIoU, long FlaggedPixels, long FlaggedCorrect, IReadOnlyList<NamedClassIoU> Classes);

public sealed record NamedClassIoU(int ClassId, string Name, double ClosedSet, double OpenSet);

/// <summary>Pass over the model (decode, network, seven maps, accumulation, spill), threshold pass (regions, frame rows), files.</summary>
public sealed record EvaluationTimings(TimeSpan ModelPass, TimeSpan ThresholdPass, TimeSpan Outputs);

/// <summary>Everything metrics.json holds.</summary>
public sealed record EvaluationReport(
    string Model,
    string ModelSha256,
    string ProfileVersion,
    string Dataset,
    string DatasetLayout,
    int Frames,
    string Mode,
    IReadOnlyList<MethodRow> Methods,
    OperatingPoint OperatingPoint,
    RegionMetricsResult Regions,
    SegmentationSummary? Segmentation,
    string? ProfileWritten,
    IReadOnlyList<string> Notes)
{
    /// <summary>Wall time of the run's parts (not in metrics.json, which is written before the clock stops).</summary>
    [JsonIgnore] public EvaluationTimings? Timings { get; init; }
    /// <summary>What the recommended threshold costs (null in reports written before it was measured).</summary>
    public OperatingTradeOff? TradeOff { get; init; }
    /// <summary>Why --write-profile did not write (the threshold flags too much and was not forced); null when written or not asked.</summary>
    public string? ProfileRefused { get; init; }
    [JsonIgnore] public IReadOnlyList<FrameRow> FrameRows { get; init; } = [];
    [JsonIgnore] public IReadOnlyList<(string Method, PixelCurves Curves)> Curves { get; init; } = [];

    public static readonly JsonSerializerOptions JsonOptions = new(JsonSerializerDefaults.Web)
    {
        WriteIndented = true,
        DefaultIgnoreCondition = JsonIgnoreCondition.WhenWritingNull,
        NumberHandling = JsonNumberHandling.AllowNamedFloatingPointLiterals,
    };
}
