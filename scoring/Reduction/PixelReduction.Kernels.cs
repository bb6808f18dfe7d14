using System.Numerics;
using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.X86;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Reduction;

public sealed unsafe partial class PixelReduction
{
    /// <summary>Off: 256-bit kernels only (the tests compare both; the bench measures both in one process).</summary>
    internal static bool WideKernels = true;

    /// <summary>
    /// Equal sizes without softmax outputs: two vectors of pixels at a time (512-bit ones where the machine has
    /// them), classes inner with max and argmax in registers (strictly greater replaces, so the lowest index wins
    /// ties; NaN never replaces, as in <see cref="ReduceBlock"/>). The finiteness check rides along as one running
    /// sum per lane: a NaN or infinite logit leaves the sum NaN or infinite for good, so a finite sum proves every
    /// logit finite; a sum that merely overflowed only sends the frame to the exact check.
    /// </summary>
    // Called a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void RunIdentityRows(Job job, Worker worker, int y0, int y1)
    {
        if (_needSoftmax)
        {
            RunIdentityRowsSoftmax(job, worker, y0, y1);
            return;
        }
        var o = new RowOut(worker);
        int c = job.Channels, width = job.Width, lanes = Vector<float>.Count;
        nint plane = (nint)job.InHeight * job.InWidth;
        var seen = Vector<float>.Zero;
        var seenWide = Vector512<float>.Zero;
        bool wide = Vector512.IsHardwareAccelerated && WideKernels;
        for (int y = y0; y < y1; y++)
        {
            float* row = job.Source + (nint)y * width;
            int x = 0;
            if (wide)
                for (; x + 2 * Vector512<float>.Count <= width; x += 2 * Vector512<float>.Count)
                    ReducePairWide(row + x, plane, c, o, x, ref seenWide);
            for (; x + 2 * lanes <= width; x += 2 * lanes)
                ReducePair(row + x, null, 1f, 0f, lanes, plane, c, o, x, blend: false, check: true, ref seen);
            // The rest of the row: single blocks, the last one overlapping its neighbour instead of reading past the row.
            for (; x < width; x += lanes)
            {
                int xs = Math.Min(x, width - lanes);
                ReduceBlock(row + xs, null, 1f, 0f, plane, c, o, xs, blend: false);
                for (int ch = 0; ch < c; ch++) seen += Vector.Load(row + ch * plane + xs);
            }
            FlushRow(job, o, y, 0, width);
        }
        float total = Vector.Sum(seen) + Vector512.Sum(seenWide);
        if (!float.IsFinite(total)) Volatile.Write(ref job.NonFinite, 1);
    }

    /// <summary>
    /// <see cref="ReducePair"/> unblended on 512-bit vectors: half the instructions per pixel where the machine runs
    /// them at full width. Same comparisons and selections per lane, so the same results.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void ReducePairWide(float* a, nint classStride, int classes, in RowOut o, int x, ref Vector512<float> seen)
    {
        int lanes = Vector512<float>.Count;
        var one = Vector512<float>.One;
        var index = Vector512<float>.Zero;
        var best0 = Vector512<float>.Zero;
        var best1 = Vector512<float>.Zero;
        var max0 = Vector512.Load(a);
        var max1 = Vector512.Load(a + lanes);
        var sum0 = max0;
        var sum1 = max1;
        float* pa = a;
        for (int c = 1; c < classes; c++)
        {
            pa += classStride;
            var v0 = Vector512.Load(pa);
            var v1 = Vector512.Load(pa + lanes);
            sum0 += v0;
            sum1 += v1;
            index += one;
            var g0 = Vector512.GreaterThan(v0, max0);
            var g1 = Vector512.GreaterThan(v1, max1);
            best0 = Vector512.ConditionalSelect(g0, index, best0);
            best1 = Vector512.ConditionalSelect(g1, index, best1);
            max0 = Vector512.ConditionalSelect(g0, v0, max0);
            max1 = Vector512.ConditionalSelect(g1, v1, max1);
        }
        seen += sum0 + sum1;
        max0.Store(o.Max + x);
        max1.Store(o.Max + x + lanes);
        Vector512.ConvertToInt32(best0).Store(o.Class + x);
        Vector512.ConvertToInt32(best1).Store(o.Class + x + lanes);
    }

    /// <summary>Equal sizes with softmax outputs: one vector of pixels at a time with the classes inner.</summary>
    // Called a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void RunIdentityRowsSoftmax(Job job, Worker worker, int y0, int y1)
    {
        var o = new RowOut(worker);
        int c = job.Channels, width = job.Width, lanes = Vector<float>.Count;
        nint plane = (nint)job.InHeight * job.InWidth;
        for (int y = y0; y < y1; y++)
        {
            float* row = job.Source + (nint)y * width;
            // The last block overlaps the one before it instead of reading past the row: recomputing is idempotent.
            for (int x = 0; ; x += lanes)
            {
                int xs = Math.Min(x, width - lanes);
                ReduceBlock(row + xs, null, 1f, 0f, plane, c, o, xs, blend: false);
                if (xs == width - lanes) break;
            }
            FlushRow(job, o, y, 0, width);
            // The finiteness check while the row's logits are still in cache saves the frame a pass over all of them.
            bool finite = true;
            for (int ch = 0; ch < c && finite; ch++)
                finite = LogitsValidation.AllFinite(new ReadOnlySpan<float>(row + ch * plane, width));
            if (!finite) Volatile.Write(ref job.NonFinite, 1);
        }
    }

    /// <summary>
    /// Resizing: per output row, blend two horizontally resampled source rows (cached per worker, laid out
    /// [block][class][lane] so the class loop reads contiguous memory) and reduce over the classes.
    /// Wide rows of many classes are split into tiles so the two cached rows stay small.
    /// </summary>
    // Called a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void RunResizedRows(Job job, Worker worker, int y0, int y1)
    {
        var o = new RowOut(worker);
        var ys = job.Ys!;
        int c = job.Channels, lanes = Vector<float>.Count;
        int blocks = (job.Width + lanes - 1) / lanes;
        nint blockStride = (nint)c * lanes;
        var unused = Vector<float>.Zero;
        for (int tile = 0; tile < blocks; tile += job.TileBlocks)
        {
            int tileBlocks = Math.Min(job.TileBlocks, blocks - tile);
            worker.Tag0 = worker.Tag1 = -1;
            for (int y = y0; y < y1; y++)
            {
                int ra = ys.Index0[y], rb = ys.Index1[y];
                float wa = ys.Weight0[y], wb = ys.Weight1[y];
                float* pa = CachedRow(job, worker, ra, rb, tile, tileBlocks);
                if (ra == rb || wb == 0f)
                {
                    // Weights (0.5, 0.5) on one row, or (1, 0): exactly the row itself.
                    int b = 0;
                    if (!_needSoftmax)
                        for (; b + 1 < tileBlocks; b += 2)
                            ReducePair(pa + b * blockStride, null, 1f, 0f, blockStride, lanes, c, o, (tile + b) * lanes, blend: false, check: false, ref unused);
                    for (; b < tileBlocks; b++)
                        ReduceBlock(pa + b * blockStride, null, 1f, 0f, lanes, c, o, (tile + b) * lanes, blend: false);
                }
                else
                {
                    float* pb = CachedRow(job, worker, rb, ra, tile, tileBlocks);
                    int b = 0;
                    if (!_needSoftmax)
                        for (; b + 1 < tileBlocks; b += 2)
                            ReducePair(pa + b * blockStride, pb + b * blockStride, wa, wb, blockStride, lanes, c, o, (tile + b) * lanes, blend: true, check: false, ref unused);
                    for (; b < tileBlocks; b++)
                        ReduceBlock(pa + b * blockStride, pb + b * blockStride, wa, wb, lanes, c, o, (tile + b) * lanes, blend: true);
                }
                FlushRow(job, o, y, tile * lanes, Math.Min(job.Width, (tile + tileBlocks) * lanes));
            }
        }
    }

    private static float* CachedRow(Job job, Worker w, int row, int keep, int tile, int tileBlocks)
    {
        if (w.Tag0 == row) return Ptr(w.Slot0);
        if (w.Tag1 == row) return Ptr(w.Slot1);
        if (w.Tag0 != keep)
        {
            ResampleRow(job, row, Ptr(w.Slot0), tile, tileBlocks);
            w.Tag0 = row;
            return Ptr(w.Slot0);
        }
        ResampleRow(job, row, Ptr(w.Slot1), tile, tileBlocks);
        w.Tag1 = row;
        return Ptr(w.Slot1);
    }

    /// <summary>Horizontal pass of one source row, all classes, into [block][class][lane] layout.</summary>
    // Called a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void ResampleRow(Job job, int row, float* dst, int tile, int tileBlocks)
    {
        var xs = job.Xs!;
        int c = job.Channels, lanes = Vector<float>.Count;
        nint plane = (nint)job.InHeight * job.InWidth;
        float* src = job.Source + (nint)row * job.InWidth;
        int* i0 = (int*)Ptr(xs.Index0), i1 = (int*)Ptr(xs.Index1);
        float* w0 = Ptr(xs.Weight0), w1 = Ptr(xs.Weight1);
        if (Avx2.IsSupported && lanes == Vector256<float>.Count)
        {
            int* window = (int*)Ptr(xs.WindowStart), rel0 = (int*)Ptr(xs.Relative0), rel1 = (int*)Ptr(xs.Relative1);
            for (int b = 0; b < tileBlocks; b++)
            {
                int x = (tile + b) * lanes;
                int start = window[tile + b];
                if (start >= 0)
                {
                    var p0 = Vector256.Load(rel0 + x);
                    var p1 = Vector256.Load(rel1 + x);
                    var v0 = Vector256.Load(w0 + x);
                    var v1 = Vector256.Load(w1 + x);
                    float* dw = dst + (nint)b * c * lanes;
                    float* sw = src + start;
                    for (int ch = 0; ch < c; ch++, sw += plane, dw += lanes)
                    {
                        var v = Vector256.Load(sw);
                        (Avx2.PermuteVar8x32(v, p0) * v0 + Avx2.PermuteVar8x32(v, p1) * v1).Store(dw);
                    }
                    continue;
                }
                var idx0 = Vector256.Load(i0 + x);
                var idx1 = Vector256.Load(i1 + x);
                var wt0 = Vector256.Load(w0 + x);
                var wt1 = Vector256.Load(w1 + x);
                float* d = dst + (nint)b * c * lanes;
                float* s = src;
                for (int ch = 0; ch < c; ch++, s += plane, d += lanes)
                {
                    var g0 = Avx2.GatherVector256(s, idx0, 4);
                    var g1 = Avx2.GatherVector256(s, idx1, 4);
                    (g0 * wt0 + g1 * wt1).Store(d);
                }
            }
            return;
        }
        for (int b = 0; b < tileBlocks; b++)
        {
            int x = (tile + b) * lanes;
            float* d = dst + (nint)b * c * lanes;
            float* s = src;
            for (int ch = 0; ch < c; ch++, s += plane, d += lanes)
                for (int l = 0; l < lanes; l++)
                    d[l] = s[i0[x + l]] * w0[x + l] + s[i1[x + l]] * w1[x + l];
        }
    }

    /// <summary>
    /// One vector of pixels: running max and argmax over the classes (strictly greater replaces, so the lowest index
    /// wins ties); with softmax outputs the blended values are kept for a second, max-shifted pass.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private void ReduceBlock(float* a, float* b, float wa, float wb, nint classStride, int classes, in RowOut o, int x, bool blend)
    {
        bool keep = _needSoftmax;
        float* vals = o.Values;
        int lanes = Vector<float>.Count;
        var one = Vector<float>.One;
        var index = Vector<float>.Zero;
        var best = Vector<float>.Zero;
        Vector<float> max;
        // ConditionalSelect on the same mask rather than Vector.Max: one blend, and max and argmax can never disagree.
        if (!blend)
        {
            max = Vector.Load(a);
            if (keep) max.Store(vals);
            float* pa = a;
            for (int c = 1; c < classes; c++)
            {
                pa += classStride;
                var v = Vector.Load(pa);
                index += one;
                var greater = Vector.GreaterThan(v, max);
                best = Vector.ConditionalSelect(greater, index, best);
                max = Vector.ConditionalSelect(greater, v, max);
                if (keep) v.Store(vals + c * lanes);
            }
        }
        else
        {
            var va = new Vector<float>(wa);
            var vb = new Vector<float>(wb);
            max = Vector.FusedMultiplyAdd(Vector.Load(a), va, Vector.Load(b) * vb);
            if (keep) max.Store(vals);
            float* pa = a, pb = b;
            for (int c = 1; c < classes; c++)
            {
                pa += classStride;
                pb += classStride;
                var v = Vector.FusedMultiplyAdd(Vector.Load(pa), va, Vector.Load(pb) * vb);
                index += one;
                var greater = Vector.GreaterThan(v, max);
                best = Vector.ConditionalSelect(greater, index, best);
                max = Vector.ConditionalSelect(greater, v, max);
                if (keep) v.Store(vals + c * lanes);
            }
        }
        max.Store(o.Max + x);
        Vector.ConvertToInt32(best).Store(o.Class + x);
        if (keep) Softmax(max, vals, classes, o, x);
    }

    /// <summary>
    /// Two blocks <paramref name="pairOffset"/> apart at once (class and max logit only): shares the loop and the class
    /// counter between two independent dependency chains, which keeps more loads in flight. With
    /// <paramref name="check"/> (unblended only) every value read is also added to <paramref name="seen"/>, which
    /// stays finite only while every value is (see <see cref="RunIdentityRows"/>).
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void ReducePair(float* a, float* b, float wa, float wb, nint pairOffset, nint classStride, int classes, in RowOut o, int x,
        bool blend, bool check, ref Vector<float> seen)
    {
        int lanes = Vector<float>.Count;
        var one = Vector<float>.One;
        var index = Vector<float>.Zero;
        var best0 = Vector<float>.Zero;
        var best1 = Vector<float>.Zero;
        Vector<float> max0, max1;
        if (!blend)
        {
            max0 = Vector.Load(a);
            max1 = Vector.Load(a + pairOffset);
            if (check) seen += max0 + max1;
            float* pa = a;
            for (int c = 1; c < classes; c++)
            {
                pa += classStride;
                var v0 = Vector.Load(pa);
                var v1 = Vector.Load(pa + pairOffset);
                if (check) seen += v0 + v1;
                index += one;
                var g0 = Vector.GreaterThan(v0, max0);
                var g1 = Vector.GreaterThan(v1, max1);
                best0 = Vector.ConditionalSelect(g0, index, best0);
                best1 = Vector.ConditionalSelect(g1, index, best1);
                max0 = Vector.ConditionalSelect(g0, v0, max0);
                max1 = Vector.ConditionalSelect(g1, v1, max1);
            }
        }
        else
        {
            var va = new Vector<float>(wa);
            var vb = new Vector<float>(wb);
            max0 = Vector.FusedMultiplyAdd(Vector.Load(a), va, Vector.Load(b) * vb);
            max1 = Vector.FusedMultiplyAdd(Vector.Load(a + pairOffset), va, Vector.Load(b + pairOffset) * vb);
            float* pa = a, pb = b;
            for (int c = 1; c < classes; c++)
            {
                pa += classStride;
                pb += classStride;
                var v0 = Vector.FusedMultiplyAdd(Vector.Load(pa), va, Vector.Load(pb) * vb);
                var v1 = Vector.FusedMultiplyAdd(Vector.Load(pa + pairOffset), va, Vector.Load(pb + pairOffset) * vb);
                index += one;
                var g0 = Vector.GreaterThan(v0, max0);
                var g1 = Vector.GreaterThan(v1, max1);
                best0 = Vector.ConditionalSelect(g0, index, best0);
                best1 = Vector.ConditionalSelect(g1, index, best1);
                max0 = Vector.ConditionalSelect(g0, v0, max0);
                max1 = Vector.ConditionalSelect(g1, v1, max1);
            }
        }
        max0.Store(o.Max + x);
        max1.Store(o.Max + x + lanes);
        Vector.ConvertToInt32(best0).Store(o.Class + x);
        Vector.ConvertToInt32(best1).Store(o.Class + x + lanes);
    }

    /// <summary>
    /// Max-shifted sums: s = Σexp(l−m), t = Σexp(l−m)(l−m). Then MSP = 1/s, entropy = log s − t/s (no large terms
    /// cancel, so it stays accurate for logits in the thousands) and energy = −m − T·log Σexp((l−m)/T).
    /// </summary>
    // Called a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void Softmax(Vector<float> max, float* vals, int classes, in RowOut o, int x)
    {
        var outputs = Outputs;
        int lanes = Vector<float>.Count;
        bool plain = (outputs & (ReductionOutputs.Msp | ReductionOutputs.Entropy)) != 0 || _temperature == 1f;
        bool tempered = (outputs & ReductionOutputs.Energy) != 0 && _temperature != 1f;
        var s = Vector<float>.Zero;
        var t = Vector<float>.Zero;
        var sT = Vector<float>.Zero;
        var invT = new Vector<float>(1f / _temperature);
        for (int c = 0; c < classes; c++)
        {
            var d = Vector.Load(vals + c * lanes) - max;
            if (plain)
            {
                var e = VectorExp.Exp(d);
                s += e;
                t += e * d;
            }
            if (tempered) sT += VectorExp.Exp(d * invT);
        }
        if ((outputs & ReductionOutputs.Msp) != 0) (Vector<float>.One / s).Store(o.Msp + x);
        if ((outputs & ReductionOutputs.Entropy) != 0) (Vector.Log(s) - t / s).Store(o.Entropy + x);
        if ((outputs & ReductionOutputs.Energy) != 0)
            (-max - new Vector<float>(_temperature) * Vector.Log(tempered ? sT : s)).Store(o.Energy + x);
    }

    /// <summary>Copies the row scratch [x0, x1) into the frame maps, narrowing class indices to ushort.</summary>
    // Called a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void FlushRow(Job job, in RowOut o, int y, int x0, int x1)
    {
        var maps = job.Maps;
        int n = x1 - x0;
        nint at = (nint)y * job.Width + x0;
        new ReadOnlySpan<float>(o.Max + x0, n).CopyTo(new Span<float>(Ptr(maps.MaxLogitArray) + at, n));
        uint* cls = (uint*)o.Class + x0;
        ushort* dst = (ushort*)Unsafe.AsPointer(ref maps.ClassIndexArray[0]) + at;
        int lanes = Vector<float>.Count, i = 0;
        for (; i + 2 * lanes <= n; i += 2 * lanes)
            Vector.Narrow(Vector.Load(cls + i), Vector.Load(cls + i + lanes)).Store(dst + i);
        for (; i < n; i++) dst[i] = (ushort)cls[i];
        var outputs = Outputs;
        if ((outputs & ReductionOutputs.Msp) != 0)
            new ReadOnlySpan<float>(o.Msp + x0, n).CopyTo(new Span<float>(Ptr(maps.MspArray) + at, n));
        if ((outputs & ReductionOutputs.Entropy) != 0)
            new ReadOnlySpan<float>(o.Entropy + x0, n).CopyTo(new Span<float>(Ptr(maps.EntropyArray) + at, n));
        if ((outputs & ReductionOutputs.Energy) != 0)
            new ReadOnlySpan<float>(o.Energy + x0, n).CopyTo(new Span<float>(Ptr(maps.EnergyArray) + at, n));
    }

    // Every array handed to this is allocated on the pinned object heap.
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static float* Ptr(float[] pinned) => (float*)Unsafe.AsPointer(ref pinned[0]);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static float* Ptr(int[] pinned) => (float*)Unsafe.AsPointer(ref pinned[0]);
}
