using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Standardization;

/// <summary>
/// Running per-class count, mean and sum of squared deviations (M2) of the max logit, in float64.
/// Each <c>Add</c> is a two-pass batch (exact mean, then deviations about it) folded into the running totals with the
/// pairwise update for combining two sets' counts, means and M2; <see cref="Merge"/> uses the same update, so
/// workers can accumulate separately. Merging the same parts in the same order gives bit-identical results.
/// The standard deviation reported is the population one (divide by count): calibration counts are in the
/// thousands to millions of pixels, where the two differ by far less than the measurement itself.
/// Not thread-safe: one per worker.
/// </summary>
public sealed class ClassStatisticsAccumulator
{
    private readonly long[] _count;
    private readonly double[] _mean;
    private readonly double[] _m2;
    private readonly long[] _batchCount;
    private readonly double[] _batchSum;
    private readonly double[] _batchM2;

    public ClassStatisticsAccumulator(int classCount)
    {
        if (classCount < 1 || classCount > ushort.MaxValue + 1)
            throw new ScoringInputException(ScoringErrorCodes.StatisticsFormat, $"Class count must be 1..65536; got {classCount}.");
        _count = new long[classCount];
        _mean = new double[classCount];
        _m2 = new double[classCount];
        _batchCount = new long[classCount];
        _batchSum = new double[classCount];
        _batchM2 = new double[classCount];
    }

    public int ClassCount => _count.Length;
    public long Count(int c) => _count[c];
    public double Mean(int c) => _mean[c];
    public double M2(int c) => _m2[c];

    /// <summary>Adds every pixel under its predicted class.</summary>
    public void Add(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex) =>
        AddFiltered(maxLogit, classIndex, ReadOnlySpan<ushort>.Empty, ReadOnlySpan<byte>.Empty, -1);

    /// <summary>Adds only pixels whose prediction equals the label, skipping <paramref name="ignoreLabel"/>.</summary>
    public void Add(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, ReadOnlySpan<byte> labels, int ignoreLabel)
    {
        CheckLabels(labels.Length, maxLogit.Length);
        AddFiltered(maxLogit, classIndex, ReadOnlySpan<ushort>.Empty, labels, ignoreLabel);
    }

    public void Add(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, ReadOnlySpan<ushort> labels, int ignoreLabel)
    {
        CheckLabels(labels.Length, maxLogit.Length);
        AddFiltered(maxLogit, classIndex, labels, ReadOnlySpan<byte>.Empty, ignoreLabel);
    }

    private static void CheckLabels(int labels, int pixels)
    {
        if (labels != pixels)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize, $"The label map has {labels} pixels but the max-logit map has {pixels}.");
    }

    private void AddFiltered(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex,
        ReadOnlySpan<ushort> wideLabels, ReadOnlySpan<byte> byteLabels, int ignoreLabel)
    {
        if (maxLogit.Length != classIndex.Length)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize,
                $"The max-logit map has {maxLogit.Length} pixels but the class map has {classIndex.Length}.");
        bool filtered = !wideLabels.IsEmpty || !byteLabels.IsEmpty;
        int classes = _count.Length;
        Array.Clear(_batchCount);
        Array.Clear(_batchSum);
        Array.Clear(_batchM2);
        for (int i = 0; i < maxLogit.Length; i++)
        {
            int c = classIndex[i];
            if (filtered && !Keep(c, i, wideLabels, byteLabels, ignoreLabel)) continue;
            if (c >= classes)
                throw new ScoringInputException(ScoringErrorCodes.StatisticsMismatch, $"Pixel {i} is of class {c}, but only {classes} classes are accumulated.");
            float v = maxLogit[i];
            if (!float.IsFinite(v))
                throw new ScoringInputException(ScoringErrorCodes.LogitsNonFinite, $"Pixel {i} has a non-finite max logit ({v}).");
            _batchCount[c]++;
            _batchSum[c] += v;
        }
        for (int c = 0; c < classes; c++)
            if (_batchCount[c] > 0) _batchSum[c] /= _batchCount[c]; // now the batch mean
        for (int i = 0; i < maxLogit.Length; i++)
        {
            int c = classIndex[i];
            if (filtered && !Keep(c, i, wideLabels, byteLabels, ignoreLabel)) continue;
            double d = maxLogit[i] - _batchSum[c];
            _batchM2[c] += d * d;
        }
        for (int c = 0; c < classes; c++)
            if (_batchCount[c] > 0) Combine(c, _batchCount[c], _batchSum[c], _batchM2[c]);
    }

    private static bool Keep(int c, int i, ReadOnlySpan<ushort> wide, ReadOnlySpan<byte> narrow, int ignoreLabel)
    {
        int label = wide.IsEmpty ? narrow[i] : wide[i];
        return label != ignoreLabel && label == c;
    }

    private void Combine(int c, long nb, double meanB, double m2B)
    {
        long na = _count[c];
        if (na == 0) { _count[c] = nb; _mean[c] = meanB; _m2[c] = m2B; return; }
        long n = na + nb;
        double delta = meanB - _mean[c];
        _mean[c] += delta * nb / n;
        _m2[c] += m2B + delta * delta * ((double)na * nb / n);
        _count[c] = n;
    }

    /// <summary>Folds another accumulator's totals into this one (the other is unchanged).</summary>
    public void Merge(ClassStatisticsAccumulator other)
    {
        if (other.ClassCount != ClassCount)
            throw new ScoringInputException(ScoringErrorCodes.StatisticsMismatch,
                $"Cannot merge statistics of {other.ClassCount} classes into statistics of {ClassCount}.");
        for (int c = 0; c < ClassCount; c++)
            if (other._count[c] > 0) Combine(c, other._count[c], other._mean[c], other._m2[c]);
    }

    public void Clear()
    {
        Array.Clear(_count);
        Array.Clear(_mean);
        Array.Clear(_m2);
    }

    /// <summary>The running totals, for checkpoints. Arrays are copies.</summary>
    public (long[] Count, double[] Mean, double[] M2) ExportState() => ((long[])_count.Clone(), (double[])_mean.Clone(), (double[])_m2.Clone());

    public static ClassStatisticsAccumulator FromState(long[] count, double[] mean, double[] m2)
    {
        if (count.Length != mean.Length || count.Length != m2.Length)
            throw new ScoringInputException(ScoringErrorCodes.StatisticsFormat,
                $"Accumulator state arrays differ in length: count {count.Length}, mean {mean.Length}, m2 {m2.Length}.");
        var a = new ClassStatisticsAccumulator(count.Length);
        for (int c = 0; c < count.Length; c++)
        {
            if (count[c] < 0 || !double.IsFinite(mean[c]) || !double.IsFinite(m2[c]) || m2[c] < 0)
                throw new ScoringInputException(ScoringErrorCodes.StatisticsFormat,
                    $"Accumulator state of class {c} is invalid: count={count[c]}, mean={mean[c]}, m2={m2[c]}.");
            a._count[c] = count[c];
            a._mean[c] = mean[c];
            a._m2[c] = m2[c];
        }
        return a;
    }

    /// <summary>Population standard deviation per class; classes without pixels get count 0, mean 0, std 0.</summary>
    public ClassStatistics ToStatistics(IReadOnlyList<string> names, long minimumCount = ClassStatistics.DefaultMinimumCount)
    {
        if (names.Count != ClassCount)
            throw new ScoringInputException(ScoringErrorCodes.StatisticsMismatch, $"{names.Count} class names for {ClassCount} accumulated classes.");
        var list = new ClassStatistic[ClassCount];
        for (int c = 0; c < ClassCount; c++)
            list[c] = new ClassStatistic(names[c], _count[c], _count[c] > 0 ? _mean[c] : 0,
                _count[c] > 0 ? Math.Sqrt(_m2[c] / _count[c]) : 0);
        return new ClassStatistics(list, minimumCount);
    }
}
