using System.Buffers;
using System.Runtime.CompilerServices;

namespace Strayspot.Scoring.Evaluation;

/// <summary>
/// Scores as unsigned keys whose integer order is the float order (−0 folded onto +0), so they can be
/// radix-sorted and compared for ties with integer equality.
/// </summary>
internal static class OrderedScoreKeys
{
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static uint ToKey(float score)
    {
        // +0f turns −0 into +0 so they tie; branch-free because score signs are random in practice.
        uint bits = BitConverter.SingleToUInt32Bits(score + 0f);
        return bits ^ ((uint)((int)bits >> 31) | 0x8000_0000u);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float ToScore(uint key)
    {
        return BitConverter.UInt32BitsToSingle(key ^ (((key >> 31) - 1u) | 0x8000_0000u));
    }

    /// <summary>Ascending LSD radix sort, 8 bits per pass; passes where every key has the same digit are skipped.</summary>
    public static void Sort(Span<uint> keys)
    {
        int n = keys.Length;
        if (n < 512)
        {
            keys.Sort();
            return;
        }
        var counts = new int[4 * 256];
        foreach (uint k in keys)
        {
            counts[k & 0xFF]++;
            counts[256 + ((k >> 8) & 0xFF)]++;
            counts[512 + ((k >> 16) & 0xFF)]++;
            counts[768 + (k >> 24)]++;
        }
        uint[] rented = ArrayPool<uint>.Shared.Rent(n);
        try
        {
            Span<uint> src = keys, dst = rented.AsSpan(0, n);
            bool inRented = false;
            Span<int> offsets = stackalloc int[256];
            for (int pass = 0; pass < 4; pass++)
            {
                var c = counts.AsSpan(pass * 256, 256);
                if (c[(int)((src[0] >> (8 * pass)) & 0xFF)] == n) continue; // one digit value only
                int sum = 0;
                for (int d = 0; d < 256; d++) { offsets[d] = sum; sum += c[d]; }
                int shift = 8 * pass;
                for (int i = 0; i < n; i++)
                {
                    uint k = src[i];
                    dst[offsets[(int)((k >> shift) & 0xFF)]++] = k;
                }
                Span<uint> t = src; src = dst; dst = t;
                inRented = !inRented;
            }
            if (inRented) src.CopyTo(keys);
        }
        finally
        {
            ArrayPool<uint>.Shared.Return(rented);
        }
    }
}
