using System.Numerics;
using System.Runtime.InteropServices;

namespace Strayspot.Scoring.Logits;

/// <summary>Checks on logits before any score is computed from them.</summary>
public static class LogitsValidation
{
    private const int ParallelThreshold = 1 << 20;
    private const int ChunkLength = 1 << 18;

    /// <summary>
    /// Rule: logits containing NaN or ±Infinity are rejected, never repaired. A non-finite logit means the model or
    /// its input is broken; clamping or zeroing it would turn that into a plausible-looking but wrong anomaly score.
    /// Throws <see cref="ScoringInputException"/> with <see cref="ScoringErrorCodes.LogitsNonFinite"/>, naming how many
    /// values are bad and where the first one is (channel, y, x).
    /// </summary>
    public static void EnsureFinite(LogitsView logits)
    {
        var data = logits.Data;
        bool allFinite;
        if (data.Length < ParallelThreshold)
        {
            allFinite = AllFinite(data.Span);
        }
        else
        {
            int chunks = (data.Length + ChunkLength - 1) / ChunkLength;
            int bad = 0;
            Parallel.For(0, chunks, (i, state) =>
            {
                int start = i * ChunkLength;
                if (!AllFinite(data.Span.Slice(start, Math.Min(ChunkLength, data.Length - start))))
                {
                    Volatile.Write(ref bad, 1);
                    state.Stop();
                }
            });
            allFinite = bad == 0;
        }
        if (!allFinite)
            ThrowNonFinite(logits);
    }

    /// <summary>True when no value is NaN or infinite: a float is non-finite exactly when its exponent bits are all ones.</summary>
    internal static bool AllFinite(ReadOnlySpan<float> values)
    {
        var bits = MemoryMarshal.Cast<float, int>(values);
        const int exponentMask = 0x7F80_0000;
        int i = 0;
        if (Vector.IsHardwareAccelerated && bits.Length >= Vector<int>.Count)
        {
            var mask = new Vector<int>(exponentMask);
            var seen = Vector<int>.Zero;
            var vectors = MemoryMarshal.Cast<int, Vector<int>>(bits);
            foreach (var v in vectors)
                seen |= Vector.Equals(v & mask, mask);
            if (seen != Vector<int>.Zero) return false;
            i = vectors.Length * Vector<int>.Count;
        }
        for (; i < bits.Length; i++)
            if ((bits[i] & exponentMask) == exponentMask) return false;
        return true;
    }

    private static void ThrowNonFinite(LogitsView logits)
    {
        var span = logits.Data.Span;
        long count = 0;
        int first = -1;
        for (int i = 0; i < span.Length; i++)
        {
            if (!float.IsFinite(span[i]))
            {
                if (first < 0) first = i;
                count++;
            }
        }
        int plane = logits.PlaneLength;
        int c = first / plane, y = first % plane / logits.Width, x = first % logits.Width;
        throw new ScoringInputException(ScoringErrorCodes.LogitsNonFinite,
            $"The logits hold {count} non-finite value(s) (NaN or infinity) out of {span.Length}; " +
            $"the first is {span[first]} at channel {c}, y {y}, x {x}.");
    }
}
