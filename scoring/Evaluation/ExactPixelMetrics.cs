using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Evaluation;

/// <summary>
/// Exact pixel metrics: keeps every counted pixel's score (4 bytes each, anomaly and in-distribution pixels in
/// separate arrays so no label byte is stored) and sorts once in <see cref="Compute"/>.
/// Memory grows with the data (about 100M pixels → 400 MB plus a sort buffer of the larger class);
/// for larger sets use <see cref="StreamingPixelMetrics"/>. Not thread-safe: accumulate per thread and <see cref="Merge"/>.
/// </summary>
public sealed class ExactPixelMetrics
{
    private uint[] _pos;
    private uint[] _neg;
    private long _posCount, _negCount;
    private bool _sorted = true;

    /// <param name="expectedPixels">Optional size hint: room for this many in-distribution pixels and a sixteenth as
    /// many anomaly pixels is taken up front (both still grow), which saves the copies and fresh-page faults of growing.</param>
    public ExactPixelMetrics(long expectedPixels = 0)
    {
        if (expectedPixels < 0 || expectedPixels > Array.MaxLength)
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The expected pixel count must be between 0 and {Array.MaxLength}; got {expectedPixels}.");
        _neg = new uint[Math.Max(1024, expectedPixels)];
        _pos = new uint[Math.Max(1024, expectedPixels / 16)];
    }

    /// <summary>Forgets all pixels but keeps the buffers, so the next evaluation reuses the memory.</summary>
    public void Clear()
    {
        _posCount = 0;
        _negCount = 0;
        _sorted = true;
    }

    public long Positives => _posCount;
    public long Negatives => _negCount;

    /// <summary>Adds one frame (or any batch) of pixels. Labels: 1 anomaly, 0 in-distribution, 255 ignored.</summary>
    /// <exception cref="ScoringInputException">Lengths differ, a label is not 0/1/255, or a counted score is NaN;
    /// nothing of the batch is kept then.</exception>
    public void Add(ReadOnlySpan<float> score, ReadOnlySpan<byte> label)
    {
        PixelInput.Validate(score, label);
        // Vectorized pre-counts size each class's array exactly, so the small class does not grow like the big one.
        int ones = label.Count((byte)1);
        int ignored = label.Count((byte)255);
        EnsureRoom(ref _pos, _posCount + ones);
        EnsureRoom(ref _neg, _negCount + (score.Length - ones - ignored));
        long p = _posCount, n = _negCount;
        uint[] pos = _pos, neg = _neg;
        for (int i = 0; i < score.Length; i++)
        {
            byte l = label[i];
            if (l == 0) neg[n++] = OrderedScoreKeys.ToKey(score[i]);
            else if (l == 1) pos[p++] = OrderedScoreKeys.ToKey(score[i]);
        }
        if (p > _posCount || n > _negCount) _sorted = false;
        _posCount = p;
        _negCount = n;
    }

    /// <summary>Appends another accumulator's pixels (for parallel accumulation); <paramref name="other"/> is unchanged.</summary>
    public void Merge(ExactPixelMetrics other)
    {
        ArgumentNullException.ThrowIfNull(other);
        if (ReferenceEquals(other, this))
            throw new ScoringInputException(EvaluationErrorCodes.MergeMismatch, "An accumulator cannot be merged into itself.");
        EnsureRoom(ref _pos, _posCount + other._posCount);
        EnsureRoom(ref _neg, _negCount + other._negCount);
        Array.Copy(other._pos, 0, _pos, _posCount, other._posCount);
        Array.Copy(other._neg, 0, _neg, _negCount, other._negCount);
        _posCount += other._posCount;
        _negCount += other._negCount;
        if (other._posCount + other._negCount > 0) _sorted = false;
    }

    /// <summary>Computes every metric with one sort of each class (radix sort, O(n)).</summary>
    /// <param name="tprTarget">TPR for the "FPR at TPR" operating point, in (0, 1]; 0.95 by default.</param>
    /// <param name="fprTarget">FPR for the "TPR at FPR" operating point, in [0, 1]; none by default.</param>
    /// <param name="curves">Also return ROC and PR curves downsampled to at most 1000 points.</param>
    public PixelMetricsResult Compute(double tprTarget = 0.95, double? fprTarget = null, bool curves = false)
    {
        ScoreGroupWalk.ValidateTargets(tprTarget, fprTarget);
        ScoreGroupWalk.RequireBothClasses(_posCount, _negCount);
        if (!_sorted)
        {
            var pos = _pos;
            var neg = _neg;
            int pc = (int)_posCount, nc = (int)_negCount;
            // The two classes are independent: sort them on two cores.
            Parallel.Invoke(() => OrderedScoreKeys.Sort(pos.AsSpan(0, pc)), () => OrderedScoreKeys.Sort(neg.AsSpan(0, nc)));
            _sorted = true;
        }
        uint top = Math.Max(_pos[_posCount - 1], _neg[_negCount - 1]);
        double none = NothingFlagged(OrderedScoreKeys.ToScore(top));
        var groups = new SortedGroups(_pos, (int)_posCount, _neg, (int)_negCount);
        return ScoreGroupWalk.Run(ref groups, _posCount, _negCount, tprTarget, fprTarget, curves, none);
    }

    internal static double NothingFlagged(float highest) =>
        float.IsPositiveInfinity(highest) ? double.PositiveInfinity : Math.BitIncrement((double)highest);

    private static void EnsureRoom(ref uint[] buffer, long needed)
    {
        if (needed <= buffer.Length) return;
        if (needed > Array.MaxLength)
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The exact mode holds at most {Array.MaxLength} pixels per class; {needed} were offered. Use the streaming mode.");
        long size = Math.Min(Math.Max(needed, (long)buffer.Length * 2), Array.MaxLength);
        Array.Resize(ref buffer, (int)size);
    }

    /// <summary>Walks both ascending key arrays from the top, grouping equal keys.</summary>
    private struct SortedGroups(uint[] pos, int posCount, uint[] neg, int negCount) : IScoreGroups
    {
        private int _ip = posCount - 1, _in = negCount - 1;

        public bool Next(out double threshold, out long positives, out long negatives)
        {
            if (_ip < 0 && _in < 0)
            {
                threshold = 0; positives = 0; negatives = 0;
                return false;
            }
            uint key = _ip < 0 ? neg[_in] : _in < 0 ? pos[_ip] : Math.Max(pos[_ip], neg[_in]);
            int ip = _ip, ineg = _in;
            while (ip >= 0 && pos[ip] == key) ip--;
            while (ineg >= 0 && neg[ineg] == key) ineg--;
            positives = _ip - ip;
            negatives = _in - ineg;
            _ip = ip;
            _in = ineg;
            threshold = OrderedScoreKeys.ToScore(key);
            return true;
        }

        public void Rewind()
        {
            _ip = posCount - 1;
            _in = negCount - 1;
        }
    }
}
