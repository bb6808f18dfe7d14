using System.Runtime.CompilerServices;
using System.Numerics;
using System.Runtime.Intrinsics;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Regions;

/// <summary>The binary anomaly mask: 1 where the anomaly score is strictly above the threshold, else 0.</summary>
public static class AnomalyMask
{
    /// <summary>Writes the mask and returns how many pixels are in it. NaN scores are never in the mask.</summary>
    public static unsafe int Threshold(ReadOnlySpan<float> score, float threshold, Span<byte> mask)
    {
        if (mask.Length != score.Length)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize,
                $"The mask must have one byte per score; got {mask.Length} bytes for {score.Length} scores.");
        int n = score.Length;
        // Memory-bound: two halves in parallel only when the frame is large.
        const int ParallelThreshold = 256 * 1024;
        fixed (float* s = score)
        fixed (byte* m = mask)
        {
            if (n < ParallelThreshold) return Run(s, m, n, threshold);
            nint sp = (nint)s, mp = (nint)m;
            int chunks = Environment.ProcessorCount * 2, total = 0;
            Parallel.For(0, chunks, c =>
            {
                long start = (long)n * c / chunks, end = (long)n * (c + 1) / chunks;
                int count = Run((float*)sp + start, (byte*)mp + start, (int)(end - start), threshold);
                Interlocked.Add(ref total, count);
            });
            return total;
        }
    }

    // Called once or a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static unsafe int Run(float* s, byte* m, int n, float threshold)
    {
        int count = 0, i = 0;
        var t = Vector256.Create(threshold);
        var one = Vector256<sbyte>.One;
        for (; i <= n - 32; i += 32)
        {
            var a = Vector256.GreaterThan(Vector256.Load(s + i), t).AsInt32();
            var b = Vector256.GreaterThan(Vector256.Load(s + i + 8), t).AsInt32();
            var c = Vector256.GreaterThan(Vector256.Load(s + i + 16), t).AsInt32();
            var d = Vector256.GreaterThan(Vector256.Load(s + i + 24), t).AsInt32();
            var bytes = Vector256.Narrow(Vector256.Narrow(a, b), Vector256.Narrow(c, d));
            Vector256.Store((bytes & one).AsByte(), m + i);
            count += BitOperations.PopCount(bytes.ExtractMostSignificantBits());
        }
        for (; i < n; i++)
        {
            bool on = s[i] > threshold;
            m[i] = on ? (byte)1 : (byte)0;
            count += on ? 1 : 0;
        }
        return count;
    }
}
