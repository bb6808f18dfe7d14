using System.Numerics.Tensors;
using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;

namespace Strayspot.Scoring.Boundaries;

/// <summary>
/// Chebyshev (L∞) distance from every pixel to the nearest edge pixel of a class map, clamped to a cap.
/// An edge pixel has an in-frame 8-neighbour of another class. A pixel lies within Chebyshev distance r of a
/// pixel of another class exactly when its distance to the nearest edge pixel is at most r−1: walking from it
/// towards that pixel, the last pixel before the class first changes is an edge pixel at most r−1 steps away;
/// conversely an edge pixel e at distance ≤ r−1 has a neighbour f of another class than e, so one of e, f
/// (at distance ≤ r) differs from the pixel's class.
/// </summary>
internal static class DistanceToEdges
{
    /// <summary>
    /// Fills <paramref name="dist"/> (w·h bytes) with min(distance, <paramref name="cap"/>); cap must be 1..64.
    /// Returns false, leaving the map at <paramref name="cap"/> everywhere, when the frame has no edge at all.
    /// When <paramref name="rowMin"/> is given it receives each row's smallest distance (lets rounds skip rows).
    /// <paramref name="rowDistance"/> is w·h bytes of scratch (allocated here when null).
    /// </summary>
    // Called once per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    public static unsafe bool Compute(ushort* cls, byte* dist, int w, int h, int cap, int bands, byte* rowMin = null, byte* rowDistance = null)
    {
        byte[]? owned = null;
        if (rowDistance == null)
        {
            owned = GC.AllocateUninitializedArray<byte>(w * h, pinned: true);
            rowDistance = (byte*)Unsafe.AsPointer(ref owned[0]);
        }
        try
        {
            // The Chebyshev distance splits by rows: min over |dy| < cap of max(|dy|, distance to the nearest edge
            // pixel within row y+dy). Both steps read only rows near their own, so bands run in parallel and no
            // pass walks the whole frame in order.
            int anyEdge = 0;
            nint c = (nint)cls, d = (nint)dist, hd = (nint)rowDistance, rm = (nint)rowMin;
            FrameBands.For(bands, h, (_, y0, y1) =>
            {
                bool found = false;
                for (int y = y0; y < y1; y++)
                {
                    bool edge = MarkEdges((ushort*)c, (byte*)hd, w, h, y, (byte)cap);
                    if (!edge) continue;
                    found = true;
                    byte* row = (byte*)hd + (long)y * w;
                    ScanFromLeft(row, w, cap);
                    ScanFromRight(row, w, cap);
                }
                if (found) Volatile.Write(ref anyEdge, 1);
            });
            if (anyEdge == 0)
            {
                new Span<byte>(dist, w * h).Fill((byte)cap);
                if (rowMin != null) new Span<byte>(rowMin, h).Fill((byte)cap);
                return false;
            }
            FrameBands.For(bands, h, (_, y0, y1) =>
            {
                for (int y = y0; y < y1; y++)
                {
                    byte* row = (byte*)d + (long)y * w;
                    CombineRows((byte*)hd, row, w, h, y, cap);
                    if (rm != 0) ((byte*)rm)[y] = TensorPrimitives.Min(new ReadOnlySpan<byte>(row, w));
                }
            });
            return true;
        }
        finally
        {
            GC.KeepAlive(owned);
        }
    }

    /// <summary>row = min over |k| &lt; cap (rows inside the frame) of max(k, rowDistance[y+k]).</summary>
    private static unsafe void CombineRows(byte* rowDistance, byte* row, int w, int h, int y, int cap)
    {
        new ReadOnlySpan<byte>(rowDistance + (long)y * w, w).CopyTo(new Span<byte>(row, w));
        for (int k = 1; k < cap; k++)
        {
            var kv = Vector256.Create((byte)k);
            for (int side = -1; side <= 1; side += 2)
            {
                int yy = y + side * k;
                if (yy < 0 || yy >= h) continue;
                byte* other = rowDistance + (long)yy * w;
                int x = 0;
                for (; x <= w - 32; x += 32)
                    Vector256.Store(Vector256.Min(Vector256.Load(row + x), Vector256.Max(Vector256.Load(other + x), kv)), row + x);
                for (; x < w; x++)
                    row[x] = (byte)Math.Min(row[x], Math.Max(other[x], k));
            }
        }
    }

    /// <summary>Row y of the initial map: 0 at edge pixels, cap elsewhere. Returns whether the row has an edge.</summary>
    private static unsafe bool MarkEdges(ushort* cls, byte* dist, int w, int h, int y, byte cap)
    {
        ushort* c = cls + (long)y * w;
        // A missing row above/below is replaced by the row itself: those comparisons are already made.
        ushort* up = y > 0 ? c - w : c;
        ushort* dn = y < h - 1 ? c + w : c;
        byte* d = dist + (long)y * w;
        bool found = false;

        d[0] = IsEdge(c, up, dn, 0, w) ? (byte)0 : cap;
        found |= d[0] == 0;
        int x = 1;
        if (w >= 34)
        {
            var capV = Vector256.Create(cap);
            var anyV = Vector256<byte>.Zero;
            for (; x <= w - 33; x += 32)
            {
                var lo = SameAsNeighbours(c, up, dn, x);
                var hi = SameAsNeighbours(c, up, dn, x + 16);
                var same = Vector256.Narrow(lo, hi);
                Vector256.Store(same & capV, d + x);
                anyV |= ~same;
            }
            found |= anyV != Vector256<byte>.Zero;
        }
        for (; x < w; x++)
        {
            bool e = IsEdge(c, up, dn, x, w);
            d[x] = e ? (byte)0 : cap;
            found |= e;
        }
        return found;
    }

    private static unsafe Vector256<ushort> SameAsNeighbours(ushort* c, ushort* up, ushort* dn, int x)
    {
        var m = Vector256.Load(c + x);
        return Vector256.Equals(m, Vector256.Load(c + x - 1)) & Vector256.Equals(m, Vector256.Load(c + x + 1))
             & Vector256.Equals(m, Vector256.Load(up + x - 1)) & Vector256.Equals(m, Vector256.Load(up + x))
             & Vector256.Equals(m, Vector256.Load(up + x + 1)) & Vector256.Equals(m, Vector256.Load(dn + x - 1))
             & Vector256.Equals(m, Vector256.Load(dn + x)) & Vector256.Equals(m, Vector256.Load(dn + x + 1));
    }

    private static unsafe bool IsEdge(ushort* c, ushort* up, ushort* dn, int x, int w)
    {
        int l = Math.Max(x - 1, 0), r = Math.Min(x + 1, w - 1);
        ushort m = c[x];
        return m != c[l] || m != c[r] || m != up[l] || m != up[x] || m != up[r] || m != dn[l] || m != dn[x] || m != dn[r];
    }

    /// <summary>
    /// row[x] = min over x' ≤ x of row[x'] + (x − x'), exact wherever that is below the cap. Steps of 1, 2, 4, …
    /// cover every offset below twice the last step; values only ever come from real paths, so updating in
    /// place in any order stays correct. Sums stay below 2·64, no byte overflow.
    /// </summary>
    private static unsafe void ScanFromLeft(byte* row, int w, int cap)
    {
        for (int s = 1; s < cap && s < w; s <<= 1)
        {
            var sv = Vector256.Create((byte)s);
            int x = w - 32;
            for (; x >= s; x -= 32)
                Vector256.Store(Vector256.Min(Vector256.Load(row + x), Vector256.Load(row + x - s) + sv), row + x);
            for (int i = Math.Min(x + 31, w - 1); i >= s; i--)
                row[i] = (byte)Math.Min(row[i], row[i - s] + s);
        }
    }

    /// <summary>Mirror of <see cref="ScanFromLeft"/>: row[x] = min over x' ≥ x of row[x'] + (x' − x).</summary>
    private static unsafe void ScanFromRight(byte* row, int w, int cap)
    {
        for (int s = 1; s < cap && s < w; s <<= 1)
        {
            var sv = Vector256.Create((byte)s);
            int x = 0;
            for (; x + 32 <= w - s; x += 32)
                Vector256.Store(Vector256.Min(Vector256.Load(row + x), Vector256.Load(row + x + s) + sv), row + x);
            for (; x < w - s; x++)
                row[x] = (byte)Math.Min(row[x], row[x + s] + s);
        }
    }
}
