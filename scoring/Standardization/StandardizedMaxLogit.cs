using System.Runtime.CompilerServices;
using System.Numerics.Tensors;
using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.X86;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Standardization;

/// <summary>
/// Standardized max logit: (maxLogit − mean[c]) / std[c] for each pixel's predicted class c. Low values mean unknown.
/// <para>Fallback rule (the only one): a class measured on fewer than <see cref="ClassStatistics.MinimumCount"/> pixels,
/// or with a standard deviation below <see cref="ClassStatistics.MinimumStd"/>, is standardized with the pooled
/// statistics of all classes that do qualify: their count-weighted mean, and the pooled standard deviation from the law
/// of total variance (count-weighted mean of the class variances plus the count-weighted variance of the class means).
/// If no class qualifies the statistics are refused.</para>
/// Finite max logits always give finite results (values beyond the float range are clamped to it).
/// </summary>
public sealed class StandardizedMaxLogit
{
    private readonly float[] _mean;
    private readonly float[] _invStd;
    /// <summary>−1/std: (x − mean)·(−1/std) is −((x − mean)/std) to the bit (IEEE products are sign-symmetric).</summary>
    private readonly float[] _negInvStd;
    private readonly float[] _std;

    public StandardizedMaxLogit(ClassStatistics statistics)
    {
        ArgumentNullException.ThrowIfNull(statistics);
        Statistics = statistics;
        var classes = statistics.Classes;
        int n = classes.Count;

        double total = 0, weightedMean = 0;
        foreach (var c in classes)
            if (Qualifies(c, statistics.MinimumCount))
            {
                total += c.Count;
                weightedMean += (double)c.Count * c.Mean;
            }
        if (total == 0)
            throw new ScoringInputException(ScoringErrorCodes.StatisticsFormat,
                $"No class of the {n} has at least {statistics.MinimumCount} pixels and a standard deviation of at least " +
                $"{ClassStatistics.MinimumStd}; the statistics cannot standardize anything. Calibrate on more frames.");
        PooledMean = weightedMean / total;
        double pooledVariance = 0;
        foreach (var c in classes)
            if (Qualifies(c, statistics.MinimumCount))
            {
                double d = c.Mean - PooledMean;
                pooledVariance += c.Count * (c.Std * c.Std + d * d);
            }
        PooledStd = Math.Sqrt(pooledVariance / total);

        _mean = new float[n];
        _invStd = new float[n];
        _negInvStd = new float[n];
        _std = new float[n];
        var fallback = new List<int>();
        for (int i = 0; i < n; i++)
        {
            var c = classes[i];
            bool own = Qualifies(c, statistics.MinimumCount);
            if (!own) fallback.Add(i);
            double mean = own ? c.Mean : PooledMean, std = own ? c.Std : PooledStd;
            _mean[i] = ToFloat(mean);
            _std[i] = ToFloat(std);
            _invStd[i] = ToFloat(1.0 / std);
            _negInvStd[i] = -_invStd[i];
        }
        FallbackClasses = fallback;
        if (n <= WideTable)
        {
            _meanWide = new float[WideTable];
            _invWide = new float[WideTable];
            _negInvWide = new float[WideTable];
            _mean.CopyTo(_meanWide, 0);
            _invStd.CopyTo(_invWide, 0);
            _negInvStd.CopyTo(_negInvWide, 0);
        }
    }

    /// <summary>Up to this many classes the tables fit two 512-bit registers: a look-up is one permute, not a gather.</summary>
    private const int WideTable = 32;

    /// <summary>Off: the 256-bit gather kernel only (the tests compare both; the bench measures both in one process).</summary>
    internal static bool WideKernels = true;
    private readonly float[]? _meanWide, _invWide, _negInvWide;

    /// <summary>Also checks that the statistics describe as many classes as the model produces.</summary>
    public StandardizedMaxLogit(ClassStatistics statistics, int logitsClassCount) : this(statistics)
        => statistics.EnsureClassCount(logitsClassCount);

    public ClassStatistics Statistics { get; }
    public int ClassCount => _mean.Length;

    /// <summary>Classes standardized with the pooled statistics, ascending.</summary>
    public IReadOnlyList<int> FallbackClasses { get; }

    public double PooledMean { get; }
    public double PooledStd { get; }

    /// <inheritdoc cref="ClassStatistics.EnsureClassCount"/>
    public void EnsureClassCount(int channels) => Statistics.EnsureClassCount(channels);

    private static bool Qualifies(ClassStatistic c, long minimumCount) =>
        c.Count >= minimumCount && c.Count > 0 && c.Std >= ClassStatistics.MinimumStd;

    private static float ToFloat(double v) => (float)Math.Clamp(v, float.MinValue, float.MaxValue);

    public void Apply(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, Span<float> sml) =>
        Apply(maxLogit, classIndex, sml, _invStd, _invWide);

    /// <summary>
    /// −SML, the anomaly score, in one pass: bit for bit what <see cref="Apply"/> followed by negation gives (the
    /// clamp range is symmetric and the sign rides on the factor), without a second walk over the map.
    /// </summary>
    public void ApplyNegated(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, Span<float> anomalyScore) =>
        Apply(maxLogit, classIndex, anomalyScore, _negInvStd, _negInvWide);

    private void Apply(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, Span<float> sml, float[] factor, float[]? factorWide)
    {
        CheckSpans(maxLogit.Length, classIndex, sml.Length);
        int i = 0;
        if (Avx512F.IsSupported && factorWide is not null && WideKernels)
            i = ApplyVectors(maxLogit, classIndex, sml, _meanWide!, factorWide, 16);
        else if (Avx2.IsSupported)
            i = ApplyVectors(maxLogit, classIndex, sml, _mean, factor, 8);
        // (x − mean)·(1/std) can exceed the float range for extreme inputs: clamping keeps the promise of finite output.
        for (; i < maxLogit.Length; i++)
        {
            int c = classIndex[i];
            sml[i] = Math.Clamp((maxLogit[i] - _mean[c]) * factor[c], float.MinValue, float.MaxValue);
        }
    }

    /// <summary>The inverse of <see cref="Apply"/>: max logit = sml·std[c] + mean[c].</summary>
    public void Undo(ReadOnlySpan<float> sml, ReadOnlySpan<ushort> classIndex, Span<float> maxLogit)
    {
        CheckSpans(sml.Length, classIndex, maxLogit.Length);
        for (int i = 0; i < sml.Length; i++)
        {
            int c = classIndex[i];
            maxLogit[i] = sml[i] * _std[c] + _mean[c];
        }
    }

    /// <summary>
    /// Vector blocks of <paramref name="step"/> pixels (8: gathers; 16: both tables in registers, at most 32 classes,
    /// the same subtraction, product and clamp per pixel, so the same bits). Returns how many pixels it did.
    /// </summary>
    private unsafe int ApplyVectors(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, Span<float> sml,
        float[] mean, float[] factor, int step)
    {
        int n = maxLogit.Length, blocks = n / step;
        fixed (float* x = maxLogit, m = mean, inv = factor, o = sml)
        fixed (ushort* cls = classIndex)
        {
            // Frame-sized maps: a few spans of blocks per core (pixels are independent, results unchanged).
            int spans = n >= ParallelPixels ? Environment.ProcessorCount * 4 : 1;
            nint xp = (nint)x, cp = (nint)cls, mp = (nint)m, ip = (nint)inv, op = (nint)o;
            void RunSpan(int s)
            {
                int b0 = (int)((long)blocks * s / spans), b1 = (int)((long)blocks * (s + 1) / spans);
                if (step == 16) ApplyBlocksWide((float*)xp, (ushort*)cp, (float*)mp, (float*)ip, (float*)op, b0, b1);
                else ApplyBlocks((float*)xp, (ushort*)cp, (float*)mp, (float*)ip, (float*)op, b0, b1);
            }
            if (spans == 1) RunSpan(0);
            else Parallel.For(0, spans, RunSpan);
        }
        return blocks * step;
    }

    // Called once per frame with a long loop: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static unsafe void ApplyBlocksWide(float* x, ushort* cls, float* mean, float* inv, float* o, int b0, int b1)
    {
        var lo = Vector512.Create(float.MinValue);
        var hi = Vector512.Create(float.MaxValue);
        Vector512<float> m0 = Vector512.Load(mean), m1 = Vector512.Load(mean + 16);
        Vector512<float> f0 = Vector512.Load(inv), f1 = Vector512.Load(inv + 16);
        for (int i = b0 * 16; i < b1 * 16; i += 16)
        {
            var idx = Avx512F.ConvertToVector512Int32(Vector256.Load(cls + i));
            var m = Avx512F.PermuteVar16x32x2(m0, idx, m1);
            var s = Avx512F.PermuteVar16x32x2(f0, idx, f1);
            Vector512.MinNative(Vector512.MaxNative((Vector512.Load(x + i) - m) * s, lo), hi).Store(o + i);
        }
    }

    /// <summary>Below this many pixels one thread does it: scheduling would cost more.</summary>
    private const int ParallelPixels = 256 * 1024;

    // Called once per frame with a long loop: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static unsafe void ApplyBlocks(float* x, ushort* cls, float* mean, float* inv, float* o, int b0, int b1)
    {
        var lo = Vector256.Create(float.MinValue);
        var hi = Vector256.Create(float.MaxValue);
        for (int i = b0 * 8; i < b1 * 8; i += 8)
        {
            var idx = Avx2.ConvertToVector256Int32(Vector128.Load(cls + i));
            var m = Avx2.GatherVector256(mean, idx, 4);
            var s = Avx2.GatherVector256(inv, idx, 4);
            Vector256.MinNative(Vector256.MaxNative((Vector256.Load(x + i) - m) * s, lo), hi).Store(o + i);
        }
    }

    private void CheckSpans(int values, ReadOnlySpan<ushort> classIndex, int output)
    {
        if (classIndex.Length != values || output != values)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize,
                $"SML needs equally long maps; got {values} values, {classIndex.Length} class indices and room for {output}.");
        if (values == 0) return;
        ushort max = TensorPrimitives.Max(classIndex);
        if (max >= _mean.Length)
        {
            int at = classIndex.IndexOfAnyInRange((ushort)_mean.Length, ushort.MaxValue);
            throw new ScoringInputException(ScoringErrorCodes.StatisticsMismatch,
                $"Pixel {at} has class {classIndex[at]} but the class statistics describe {_mean.Length} classes (0–{_mean.Length - 1}).");
        }
    }
}
