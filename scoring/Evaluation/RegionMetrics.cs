using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Evaluation;

/// <summary>
/// Component-level detection quality at a fixed anomaly threshold, accumulated over frames.
/// <para>
/// Components are 8-connected. A ground-truth component K is a connected set of anomaly pixels (label 1); a predicted
/// component Q is a connected set of flagged pixels (mask 1).
/// </para>
/// <para>
/// <b>sIoU(K)</b> — how well K is covered without counting other objects against it: let P(K) be the union of the
/// predicted components that touch K, and A(K) the pixels of P(K) that belong to other ground-truth components. Then
/// sIoU(K) = |K ∩ P(K)| / |(K ∪ P(K)) \ A(K)|. A single prediction spanning two adjacent objects therefore costs each
/// object only the background it adds, not the other object.
/// </para>
/// <para>
/// <b>PPV(Q)</b> — how much of a prediction is really anomaly: |Q ∩ anomaly| / |Q|.
/// </para>
/// <para>
/// Ignore pixels (label 255) count nowhere: not in |K|, not in |Q|, not in any union. Components are still traced
/// through them (connectivity comes from the mask alone), and a predicted component lying wholly on ignore pixels
/// is dropped, neither true nor false. This keeps unlabelled or void areas from deciding a score.
/// </para>
/// <para>
/// At a level τ: TP = ground-truth components with sIoU &gt; τ, FN = those with sIoU ≤ τ, FP = predicted components
/// with PPV ≤ τ, and F1(τ) = 2TP / (2TP + FN + FP). Counts are summed over all frames before F1 is taken; the
/// summary averages F1 over τ = 0.25, 0.30, …, 0.75.
/// </para>
/// Not thread-safe: accumulate per thread and <see cref="Merge"/>.
/// </summary>
public sealed class RegionMetrics
{
    /// <summary>The levels τ of the F1 summary: 0.25 to 0.75 in steps of 0.05.</summary>
    public static IReadOnlyList<double> Levels { get; } = Enumerable.Range(0, 11).Select(i => (25 + 5 * i) / 100.0).ToArray();

    private readonly List<double> _siou = [];
    private readonly List<double> _ppv = [];
    private readonly ComponentLabeller _labeller = new();
    private readonly HashSet<long> _pairs = [];
    private int[] _gtIds = [], _predIds = [];
    private long[] _gtSize = [], _inter = [], _bgTouch = [], _predPos = [], _predBg = [];

    public int Frames { get; private set; }

    /// <summary>Adds one frame and returns its per-component values.</summary>
    /// <param name="predicted">Flag mask, 0 or 1 per pixel (the score thresholded).</param>
    /// <param name="groundTruth">0 in-distribution, 1 anomaly, 255 ignore.</param>
    public RegionFrameScores Add(ReadOnlySpan<byte> predicted, ReadOnlySpan<byte> groundTruth, int width, int height)
    {
        int n = CheckFrame(predicted, groundTruth, width, height);
        Grow(ref _gtIds, n);
        Grow(ref _predIds, n);
        var gtIds = _gtIds.AsSpan(0, n);
        var predIds = _predIds.AsSpan(0, n);
        int gtCount = _labeller.Label(groundTruth, 1, width, height, gtIds);
        int predCount = _labeller.Label(predicted, 1, width, height, predIds);
        ClearGrow(ref _gtSize, gtCount + 1);
        ClearGrow(ref _inter, gtCount + 1);
        ClearGrow(ref _bgTouch, gtCount + 1);
        ClearGrow(ref _predPos, predCount + 1);
        ClearGrow(ref _predBg, predCount + 1);
        _pairs.Clear();
        long lastPair = -1;
        for (int i = 0; i < n; i++)
        {
            int k = gtIds[i], q = predIds[i];
            if (k != 0)
            {
                _gtSize[k]++;
                if (q == 0) continue;
                _inter[k]++;
                _predPos[q]++;
                long pair = ((long)k << 32) | (uint)q;
                if (pair != lastPair) { _pairs.Add(pair); lastPair = pair; }
            }
            else if (q != 0 && groundTruth[i] == 0) _predBg[q]++;
        }
        // Each touching prediction adds its background pixels to K's union; pixels of other objects (A(K)) are left out.
        foreach (long pair in _pairs)
            _bgTouch[(int)(pair >> 32)] += _predBg[(int)(uint)pair];
        var siou = new double[gtCount];
        for (int k = 1; k <= gtCount; k++)
            siou[k - 1] = (double)_inter[k] / (_gtSize[k] + _bgTouch[k]);
        var ppv = new List<double>(predCount);
        for (int q = 1; q <= predCount; q++)
        {
            long counted = _predPos[q] + _predBg[q];
            if (counted > 0) ppv.Add((double)_predPos[q] / counted);
        }
        _siou.AddRange(siou);
        _ppv.AddRange(ppv);
        Frames++;
        return new RegionFrameScores(siou, ppv);
    }

    /// <summary>Adds another accumulator's components; <paramref name="other"/> is unchanged.</summary>
    public void Merge(RegionMetrics other)
    {
        ArgumentNullException.ThrowIfNull(other);
        if (ReferenceEquals(other, this))
            throw new ScoringInputException(EvaluationErrorCodes.MergeMismatch, "An accumulator cannot be merged into itself.");
        _siou.AddRange(other._siou);
        _ppv.AddRange(other._ppv);
        Frames += other.Frames;
    }

    public RegionMetricsResult Compute()
    {
        var levels = new RegionCountsAt[Levels.Count];
        double f1Sum = 0;
        bool f1Defined = true;
        for (int t = 0; t < levels.Length; t++)
        {
            double tau = Levels[t];
            long tp = 0, fp = 0;
            foreach (double v in _siou) if (v > tau) tp++;
            foreach (double v in _ppv) if (v <= tau) fp++;
            long fn = _siou.Count - tp;
            long denominator = 2 * tp + fn + fp;
            double? f1 = denominator == 0 ? null : 2.0 * tp / denominator;
            levels[t] = new RegionCountsAt(tau, tp, fn, fp, f1);
            if (f1 is double f) f1Sum += f; else f1Defined = false;
        }
        return new RegionMetricsResult(Frames, _siou.Count, _ppv.Count,
            _siou.Count == 0 ? null : Mean(_siou), _ppv.Count == 0 ? null : Mean(_ppv),
            levels, f1Defined ? f1Sum / levels.Length : null);
    }

    private static double Mean(List<double> values)
    {
        double sum = 0;
        foreach (double v in values) sum += v;
        return sum / values.Count;
    }

    private static int CheckFrame(ReadOnlySpan<byte> predicted, ReadOnlySpan<byte> groundTruth, int width, int height)
    {
        long n = (long)width * height;
        if (width < 1 || height < 1 || predicted.Length != n || groundTruth.Length != n)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize,
                $"A {width}×{height} frame needs {n} mask and {n} label values; got {predicted.Length} and {groundTruth.Length}.");
        int bad = predicted.IndexOfAnyExcept((byte)0, (byte)1);
        if (bad >= 0)
            throw new ScoringInputException(EvaluationErrorCodes.LabelValue,
                $"Predicted masks must be 0 or 1; got {predicted[bad]} at position {bad}.");
        bad = groundTruth.IndexOfAnyExcept((byte)0, (byte)1, (byte)255);
        if (bad >= 0)
            throw new ScoringInputException(EvaluationErrorCodes.LabelValue,
                $"Anomaly labels must be 0 (in-distribution), 1 (anomaly) or 255 (ignore); got {groundTruth[bad]} at position {bad}.");
        return (int)n;
    }

    private static void Grow<T>(ref T[] buffer, int size)
    {
        if (buffer.Length < size) buffer = new T[Math.Max(size, buffer.Length * 2)];
    }

    private static void ClearGrow(ref long[] buffer, int size)
    {
        Grow(ref buffer, size);
        Array.Clear(buffer, 0, size);
    }
}

/// <summary>One frame's values: sIoU per ground-truth component, PPV per counted predicted component (label order).</summary>
public sealed record RegionFrameScores(IReadOnlyList<double> SIoU, IReadOnlyList<double> Ppv);

/// <summary>Counts at one level τ; <see cref="F1"/> is null when there is neither a ground-truth nor a predicted component.</summary>
public sealed record RegionCountsAt(double Level, long TruePositives, long FalseNegatives, long FalsePositives, double? F1);

/// <summary>
/// Region metrics over all frames. Means are null when there is nothing to average; <see cref="MeanF1"/> is null
/// when F1 is undefined at some level (no components of either kind).
/// </summary>
public sealed record RegionMetricsResult(
    int Frames,
    int GroundTruthComponents,
    int PredictedComponents,
    double? MeanSIoU,
    double? MeanPpv,
    IReadOnlyList<RegionCountsAt> Levels,
    double? MeanF1);
