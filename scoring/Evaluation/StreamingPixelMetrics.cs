using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Evaluation;

/// <summary>
/// Pixel metrics from fixed-width histograms of anomaly and in-distribution scores over [minScore, maxScore]:
/// memory is fixed (16 bytes per bin) whatever the number of pixels. Scores outside the range go to the end bins
/// and are counted in <see cref="Clamped"/>. Each non-empty bin acts as one group of tied scores, so the result is
/// the exact result of the binned scores; <see cref="PixelMetricsResult.ErrorBounds"/> says how far that can be from
/// the exact result of the raw scores. Not thread-safe: accumulate per thread and <see cref="Merge"/>.
/// </summary>
public sealed class StreamingPixelMetrics
{
    // counts[2·bin + label]: one array keeps a bin's two counts on the same cache line.
    private readonly long[] _counts;
    private readonly double _scale;
    private float _lowestClamped = float.PositiveInfinity, _highestClamped = float.NegativeInfinity;

    public StreamingPixelMetrics(float minScore, float maxScore, int bins = 1 << 16)
    {
        if (!float.IsFinite(minScore) || !float.IsFinite(maxScore) || !(minScore < maxScore))
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The score range must be finite with min < max; got [{minScore}, {maxScore}].");
        if (bins < 2 || bins > 1 << 24)
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The bin count must be between 2 and {1 << 24}; got {bins}.");
        MinScore = minScore;
        MaxScore = maxScore;
        Bins = bins;
        _scale = bins / ((double)maxScore - minScore);
        if (double.IsInfinity(_scale))
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The score range [{minScore}, {maxScore}] is too narrow for {bins} bins.");
        _counts = new long[2 * bins];
    }

    public float MinScore { get; }
    public float MaxScore { get; }
    public int Bins { get; }
    public long Positives { get; private set; }
    public long Negatives { get; private set; }

    /// <summary>Counted pixels whose score lay outside [MinScore, MaxScore] and went to an end bin.</summary>
    public long Clamped { get; private set; }

    /// <summary>Lower edge of a bin: the threshold reported for it. A score within rounding of an edge may sit in
    /// the bin below, so applying a reported threshold reproduces the reported rates to within that bin's counts.</summary>
    public double BinLowerEdge(int bin) => MinScore + bin / _scale;

    /// <summary>Adds one frame (or any batch). Labels: 1 anomaly, 0 in-distribution, 255 ignored.</summary>
    /// <exception cref="ScoringInputException">Lengths differ, a label is not 0/1/255, or a counted score is NaN;
    /// nothing of the batch is kept then.</exception>
    public void Add(ReadOnlySpan<float> score, ReadOnlySpan<byte> label)
    {
        PixelInput.Validate(score, label);
        long[] counts = _counts;
        float min = MinScore, max = MaxScore;
        double scale = _scale;
        int last = Bins - 1;
        long clamped = 0, ones = 0, zeros = 0;
        for (int i = 0; i < score.Length; i++)
        {
            int l = label[i];
            if (l > 1) continue;
            float s = score[i];
            int bin;
            if (s >= min && s < max)
            {
                bin = (int)((s - (double)min) * scale); // monotone in s, so bins keep the order of scores
                if (bin > last) bin = last;
            }
            else bin = Clamp(s, ref clamped);
            counts[(bin << 1) | l]++;
            ones += l;
            zeros += 1 - l;
        }
        Positives += ones;
        Negatives += zeros;
        Clamped += clamped;
    }

    private int Clamp(float s, ref long clamped)
    {
        if (s < MinScore)
        {
            clamped++;
            if (s < _lowestClamped) _lowestClamped = s;
            return 0;
        }
        if (s > MaxScore)
        {
            clamped++;
            if (s > _highestClamped) _highestClamped = s;
        }
        return Bins - 1;
    }

    /// <summary>Adds another accumulator's histograms (same range and bins); <paramref name="other"/> is unchanged.</summary>
    public void Merge(StreamingPixelMetrics other)
    {
        ArgumentNullException.ThrowIfNull(other);
        if (other.MinScore != MinScore || other.MaxScore != MaxScore || other.Bins != Bins)
            throw new ScoringInputException(EvaluationErrorCodes.MergeMismatch,
                $"Histograms must share range and bins to merge; got [{MinScore}, {MaxScore}]×{Bins} and [{other.MinScore}, {other.MaxScore}]×{other.Bins}.");
        if (ReferenceEquals(other, this))
            throw new ScoringInputException(EvaluationErrorCodes.MergeMismatch, "An accumulator cannot be merged into itself.");
        for (int i = 0; i < _counts.Length; i++) _counts[i] += other._counts[i];
        Positives += other.Positives;
        Negatives += other.Negatives;
        Clamped += other.Clamped;
        _lowestClamped = Math.Min(_lowestClamped, other._lowestClamped);
        _highestClamped = Math.Max(_highestClamped, other._highestClamped);
    }

    /// <summary>Anomaly and in-distribution counts of one bin.</summary>
    public (long Positives, long Negatives) BinCounts(int bin) => (_counts[2 * bin + 1], _counts[2 * bin]);

    /// <summary>The metrics of the binned scores plus their worst-case distance from the exact metrics.</summary>
    /// <param name="tprTarget">TPR for the "FPR at TPR" operating point, in (0, 1]; 0.95 by default.</param>
    /// <param name="fprTarget">FPR for the "TPR at FPR" operating point, in [0, 1]; none by default.</param>
    /// <param name="curves">Also return ROC and PR curves downsampled to at most 1000 points.</param>
    public PixelMetricsResult Compute(double tprTarget = 0.95, double? fprTarget = null, bool curves = false)
    {
        ScoreGroupWalk.ValidateTargets(tprTarget, fprTarget);
        ScoreGroupWalk.RequireBothClasses(Positives, Negatives);
        double none = ExactPixelMetrics.NothingFlagged(Math.Max(MaxScore, _highestClamped));
        var groups = new BinGroups(this);
        var result = ScoreGroupWalk.Run(ref groups, Positives, Negatives, tprTarget, fprTarget, curves, none);
        return result with { ErrorBounds = Bounds(tprTarget, fprTarget) };
    }

    private double ThresholdOf(int bin) =>
        bin == 0 ? Math.Min(MinScore, _lowestClamped) : BinLowerEdge(bin);

    private StreamingErrorBounds Bounds(double tprTarget, double? fprTarget)
    {
        long P = Positives, N = Negatives;
        Int128 sharedPairs = 0;
        double apBound = 0, fprBound = 0, tprBound = 0;
        bool crossed = false, fprStopped = false;
        long tp = 0, fp = 0;
        for (int b = Bins - 1; b >= 0; b--)
        {
            long dp = _counts[2 * b + 1], dn = _counts[2 * b];
            if (dp == 0 && dn == 0) continue;
            sharedPairs += (Int128)dp * dn;
            long tpA = tp, fpA = fp;
            tp += dp;
            fp += dn;
            if (dp > 0)
            {
                // Inside the bin every exact point has TP in [tpA, tp] and FP in [fpA, fp]; the binned precision lies there too.
                double hi = (double)tp / (tp + fpA);
                double lo = fp == 0 ? 1 : (double)tpA / (tpA + fp);
                apBound += (double)dp / P * (hi - lo);
            }
            if (!crossed && (double)tp / P >= tprTarget)
            {
                crossed = true;
                fprBound = (double)dn / N;
            }
            if (fprTarget is double f && !fprStopped && (double)fp / N > f)
            {
                // The first bin that overshoots: the exact curve may still gain up to its positives.
                fprStopped = true;
                tprBound = (double)dp / P;
            }
        }
        return new StreamingErrorBounds((double)sharedPairs / (2.0 * P * N), apBound, fprBound,
            fprTarget is null ? null : tprBound);
    }

    private struct BinGroups(StreamingPixelMetrics owner) : IScoreGroups
    {
        private int _bin = owner.Bins;

        public bool Next(out double threshold, out long positives, out long negatives)
        {
            long[] c = owner._counts;
            while (--_bin >= 0)
            {
                positives = c[2 * _bin + 1];
                negatives = c[2 * _bin];
                if (positives == 0 && negatives == 0) continue;
                threshold = owner.ThresholdOf(_bin);
                return true;
            }
            threshold = 0; positives = 0; negatives = 0;
            return false;
        }

        public void Rewind() => _bin = owner.Bins;
    }
}
