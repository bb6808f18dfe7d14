using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Evaluation;

/// <summary>
/// What flagging pixels as unknown costs the segmentation itself, accumulated over frames.
/// <para>
/// Closed-set IoU per class c = TP / (TP + FP + FN) of the predicted class map. Open-set IoU: a pixel flagged unknown
/// leaves its predicted class (it is neither TP nor FP for it) and counts as a miss (FN) for its ground-truth class,
/// even when the predicted class was right. Flagging a wrong prediction therefore raises the predicted class's IoU;
/// flagging a right one lowers the true class's IoU.
/// </para>
/// <para>
/// Means run over the classes present in the ground truth (at least one non-ignored pixel), the same set for both, so
/// the two numbers are comparable; a class only ever predicted has no IoU. Pixels whose ground truth is the ignore
/// label count nowhere.
/// </para>
/// Not thread-safe: accumulate per thread and <see cref="Merge"/>.
/// </summary>
public sealed class SegmentationQuality
{
    private readonly long[] _tp, _fp, _fn, _tpOpen, _fpOpen, _fnOpen;
    private long _flagged, _flaggedCorrect;

    /// <param name="classCount">Number of classes; class ids are 0..classCount−1.</param>
    /// <param name="ignoreLabel">Ground-truth id that means "not labelled"; must not be a class id.</param>
    public SegmentationQuality(int classCount, int ignoreLabel = 255)
    {
        if (classCount < 1 || classCount > ushort.MaxValue)
            throw new ScoringInputException(EvaluationErrorCodes.Argument, $"The class count must be between 1 and {ushort.MaxValue}; got {classCount}.");
        if (ignoreLabel < classCount || ignoreLabel > ushort.MaxValue)
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The ignore label must lie outside the class ids 0..{classCount - 1} and fit 16 bits; got {ignoreLabel}.");
        ClassCount = classCount;
        IgnoreLabel = ignoreLabel;
        _tp = new long[classCount]; _fp = new long[classCount]; _fn = new long[classCount];
        _tpOpen = new long[classCount]; _fpOpen = new long[classCount]; _fnOpen = new long[classCount];
    }

    public int ClassCount { get; }
    public int IgnoreLabel { get; }

    /// <summary>Adds one frame of 16-bit class maps and its unknown mask (0/1).</summary>
    public void Add(ReadOnlySpan<ushort> groundTruth, ReadOnlySpan<ushort> predicted, ReadOnlySpan<byte> unknown)
    {
        Check(groundTruth.Length, predicted.Length, unknown.Length);
        for (int i = 0; i < groundTruth.Length; i++) Validate(groundTruth[i], predicted[i], unknown[i], i);
        for (int i = 0; i < groundTruth.Length; i++) Count(groundTruth[i], predicted[i], unknown[i]);
    }

    /// <summary>Adds one frame of 8-bit class maps and its unknown mask (0/1).</summary>
    public void Add(ReadOnlySpan<byte> groundTruth, ReadOnlySpan<byte> predicted, ReadOnlySpan<byte> unknown)
    {
        Check(groundTruth.Length, predicted.Length, unknown.Length);
        for (int i = 0; i < groundTruth.Length; i++) Validate(groundTruth[i], predicted[i], unknown[i], i);
        for (int i = 0; i < groundTruth.Length; i++) Count(groundTruth[i], predicted[i], unknown[i]);
    }

    public void Merge(SegmentationQuality other)
    {
        ArgumentNullException.ThrowIfNull(other);
        if (other.ClassCount != ClassCount || other.IgnoreLabel != IgnoreLabel || ReferenceEquals(other, this))
            throw new ScoringInputException(EvaluationErrorCodes.MergeMismatch,
                $"Segmentation accumulators must be distinct with the same classes and ignore label; got {ClassCount}/{IgnoreLabel} and {other.ClassCount}/{other.IgnoreLabel}.");
        for (int c = 0; c < ClassCount; c++)
        {
            _tp[c] += other._tp[c]; _fp[c] += other._fp[c]; _fn[c] += other._fn[c];
            _tpOpen[c] += other._tpOpen[c]; _fpOpen[c] += other._fpOpen[c]; _fnOpen[c] += other._fnOpen[c];
        }
        _flagged += other._flagged;
        _flaggedCorrect += other._flaggedCorrect;
    }

    /// <exception cref="ScoringInputException">No labelled pixel was added.</exception>
    public SegmentationQualityResult Compute()
    {
        var classes = new List<ClassIoU>();
        double closed = 0, open = 0;
        for (int c = 0; c < ClassCount; c++)
        {
            if (_tp[c] + _fn[c] == 0) continue; // not in the ground truth
            double iou = (double)_tp[c] / (_tp[c] + _fp[c] + _fn[c]);
            double iouOpen = (double)_tpOpen[c] / (_tpOpen[c] + _fpOpen[c] + _fnOpen[c]);
            classes.Add(new ClassIoU(c, iou, iouOpen));
            closed += iou;
            open += iouOpen;
        }
        if (classes.Count == 0)
            throw new ScoringInputException(EvaluationErrorCodes.OneClass, "Segmentation quality needs at least one labelled (non-ignored) pixel; got none.");
        return new SegmentationQualityResult(classes, closed / classes.Count, open / classes.Count, _flagged, _flaggedCorrect);
    }

    private static void Check(int gt, int pred, int unknown)
    {
        if (gt != pred || gt != unknown)
            throw new ScoringInputException(EvaluationErrorCodes.LengthMismatch,
                $"Ground truth, prediction and unknown mask must have the same length; got {gt}, {pred} and {unknown}.");
    }

    private void Validate(int g, int p, byte u, int i)
    {
        if (g >= ClassCount && g != IgnoreLabel)
            throw new ScoringInputException(EvaluationErrorCodes.LabelValue,
                $"Ground-truth class ids must be below {ClassCount} or the ignore label {IgnoreLabel}; got {g} at position {i}.");
        if (p >= ClassCount)
            throw new ScoringInputException(EvaluationErrorCodes.LabelValue,
                $"Predicted class ids must be below {ClassCount}; got {p} at position {i}.");
        if (u > 1)
            throw new ScoringInputException(EvaluationErrorCodes.LabelValue, $"Unknown masks must be 0 or 1; got {u} at position {i}.");
    }

    private void Count(int g, int p, byte u)
    {
        if (g == IgnoreLabel) return;
        bool right = g == p;
        if (right) _tp[g]++;
        else { _fp[p]++; _fn[g]++; }
        if (u != 0)
        {
            _flagged++;
            if (right) _flaggedCorrect++;
            _fnOpen[g]++;
            return;
        }
        if (right) _tpOpen[g]++;
        else { _fpOpen[p]++; _fnOpen[g]++; }
    }
}

/// <summary>IoU of one class before and after unknown pixels leave their predicted class.</summary>
public sealed record ClassIoU(int ClassId, double ClosedSet, double OpenSet);

/// <summary>
/// Means over the classes present in the ground truth. <see cref="FlaggedCorrect"/> counts flagged pixels whose
/// predicted class was right: the part of the flagging that costs segmentation quality.
/// </summary>
public sealed record SegmentationQualityResult(
    IReadOnlyList<ClassIoU> Classes,
    double ClosedSetMeanIoU,
    double OpenSetMeanIoU,
    long FlaggedPixels,
    long FlaggedCorrect);
