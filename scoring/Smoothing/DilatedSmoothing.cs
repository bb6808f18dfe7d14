using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;
using Strayspot.Scoring.Boundaries;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Scoring.Smoothing;

/// <summary>
/// Dilated Gaussian smoothing: the k×k Gaussian (σ in taps) sampled with d pixels between taps, so a small
/// kernel averages over a wide area and a lone noisy pixel cannot make a region on its own. Border rule:
/// replicate (coordinates are clamped into the frame). Computed separably, horizontal pass then vertical pass.
/// Scratch is owned by the instance and reused; one instance is not for concurrent use.
/// </summary>
public sealed class DilatedSmoothing
{
    /// <summary>Off: 256-bit kernels only (the tests compare both; the bench measures both in one process).</summary>
    internal static bool WideKernels = true;

    private readonly float[] _kernel;
    private readonly int _dilation;
    private readonly int _half;
    private float[] _scratch = [];

    public DilatedSmoothing(SmoothingOptions options)
    {
        ArgumentNullException.ThrowIfNull(options);
        Enabled = options.Enabled;
        if (!Enabled) { _kernel = [1f]; _dilation = 1; return; }
        if (options.KernelSize < 1 || options.KernelSize % 2 == 0 || options.KernelSize > 63)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"Smoothing kernel size must be odd, 1..63; got {options.KernelSize}.");
        if (!(options.Sigma > 0) || !double.IsFinite(options.Sigma))
            throw new ScoringInputException(ScoringErrorCodes.Options, $"Smoothing sigma must be positive; got {options.Sigma}.");
        if (options.Dilation is < 1 or > 64)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"Smoothing dilation must be 1..64; got {options.Dilation}.");
        _dilation = options.Dilation;
        _half = (options.KernelSize - 1) / 2;
        _kernel = MakeKernel(options.KernelSize, options.Sigma);
    }

    /// <summary>False when the options disable the stage; <see cref="Apply"/> then leaves values as they are.</summary>
    public bool Enabled { get; }

    /// <summary>The 1-D taps g_i ∝ exp(−i²/(2σ²)), i = −(k−1)/2 … (k−1)/2, summing to 1.</summary>
    public ReadOnlySpan<float> Kernel => _kernel;

    private static float[] MakeKernel(int size, double sigma)
    {
        int half = (size - 1) / 2;
        var g = new double[size];
        double sum = 0;
        for (int i = -half; i <= half; i++) sum += g[i + half] = Math.Exp(-(double)i * i / (2 * sigma * sigma));
        var k = new float[size];
        for (int i = 0; i < size; i++) k[i] = (float)(g[i] / sum);
        return k;
    }

    /// <summary>Smooths <paramref name="values"/> (row-major, width×height) in place.</summary>
    public unsafe void Apply(Span<float> values, int width, int height)
    {
        FrameBands.CheckSize(width, height, values.Length, "score map");
        if (!Enabled || _kernel.Length == 1) return;
        int n = width * height;
        if (_scratch.Length < n) _scratch = new float[n];
        int bands = FrameBands.BandCount(width, height);
        fixed (float* v = values)
        fixed (float* t = _scratch)
        fixed (float* k = _kernel)
        {
            nint vp = (nint)v, tp = (nint)t, kp = (nint)k;
            int taps = _kernel.Length, half = _half, dil = _dilation;
            FrameBands.For(bands, height, (_, y0, y1) =>
            {
                for (int y = y0; y < y1; y++)
                    HorizontalRow((float*)vp + (long)y * width, (float*)tp + (long)y * width, width, (float*)kp, taps, half, dil);
            });
            FrameBands.For(bands, height, (_, y0, y1) =>
            {
                for (int y = y0; y < y1; y++)
                    VerticalRow((float*)tp, (float*)vp + (long)y * width, width, height, y, (float*)kp, taps, half, dil);
            });
        }
    }

    // Called once or a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static unsafe void HorizontalRow(float* input, float* output, int w, float* k, int taps, int half, int dil)
    {
        int reach = half * dil;
        // Interior: every tap lands inside the row, no clamping.
        int start = Math.Min(reach, w), end = Math.Max(w - reach, start);
        for (int x = 0; x < start; x++) output[x] = ClampedTap(input, w, x, k, taps, half, dil);
        int xv = start;
        if (Vector512.IsHardwareAccelerated && WideKernels)
            for (; xv <= end - 16; xv += 16)
            {
                float* p = input + xv;
                var acc = Vector512.Create(k[half]) * Vector512.Load(p);
                for (int j = 1; j <= half; j++)
                    acc = Vector512.FusedMultiplyAdd(Vector512.Create(k[half + j]),
                        Vector512.Load(p - j * dil) + Vector512.Load(p + j * dil), acc);
                Vector512.Store(acc, output + xv);
            }
        for (; xv <= end - 8; xv += 8)
        {
            // The kernel is symmetric: add the mirrored taps first, then one multiply-add per pair.
            float* p = input + xv;
            var acc = Vector256.Create(k[half]) * Vector256.Load(p);
            for (int j = 1; j <= half; j++)
                acc = Vector256.FusedMultiplyAdd(Vector256.Create(k[half + j]),
                    Vector256.Load(p - j * dil) + Vector256.Load(p + j * dil), acc);
            Vector256.Store(acc, output + xv);
        }
        for (; xv < end; xv++) output[xv] = ClampedTap(input, w, xv, k, taps, half, dil);
        for (int x = end; x < w; x++) output[x] = ClampedTap(input, w, x, k, taps, half, dil);
    }

    private static unsafe float ClampedTap(float* input, int w, int x, float* k, int taps, int half, int dil)
    {
        float acc = 0;
        for (int i = 0; i < taps; i++)
            acc += k[i] * input[Math.Clamp(x + (i - half) * dil, 0, w - 1)];
        return acc;
    }

    // Called once or a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static unsafe void VerticalRow(float* input, float* output, int w, int h, int y, float* k, int taps, int half, int dil)
    {
        // At most 63 taps: the row pointers live on the stack.
        float** rows = stackalloc float*[taps];
        for (int i = 0; i < taps; i++) rows[i] = input + (long)Math.Clamp(y + (i - half) * dil, 0, h - 1) * w;
        int x = 0;
        if (Vector512.IsHardwareAccelerated && WideKernels)
            for (; x <= w - 16; x += 16)
            {
                var acc = Vector512.Create(k[half]) * Vector512.Load(rows[half] + x);
                for (int j = 1; j <= half; j++)
                    acc = Vector512.FusedMultiplyAdd(Vector512.Create(k[half + j]),
                        Vector512.Load(rows[half - j] + x) + Vector512.Load(rows[half + j] + x), acc);
                Vector512.Store(acc, output + x);
            }
        for (; x <= w - 8; x += 8)
        {
            var acc = Vector256.Create(k[half]) * Vector256.Load(rows[half] + x);
            for (int j = 1; j <= half; j++)
                acc = Vector256.FusedMultiplyAdd(Vector256.Create(k[half + j]),
                    Vector256.Load(rows[half - j] + x) + Vector256.Load(rows[half + j] + x), acc);
            Vector256.Store(acc, output + x);
        }
        for (; x < w; x++)
        {
            float acc = 0;
            for (int i = 0; i < taps; i++) acc += k[i] * rows[i][x];
            output[x] = acc;
        }
    }
}
