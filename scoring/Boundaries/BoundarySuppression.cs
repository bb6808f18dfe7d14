using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.X86;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Scoring.Boundaries;

/// <summary>
/// Iterative boundary suppression. Round i uses width r_i = <see cref="BoundarySuppressionOptions.WidthAt"/>(i):
/// a pixel is a boundary pixel when some pixel within Chebyshev distance r_i has another predicted class;
/// every boundary pixel takes the mean of the non-boundary pixels of its 3×3 neighbourhood (values of the
/// previous round, neighbours outside the frame do not exist), or keeps its value when it has none.
/// Non-boundary pixels never change. Scores at class boundaries are unreliable (the model hesitates between
/// two known classes there), so they are replaced by their confident surroundings.
/// </summary>
/// <remarks>
/// Boundaries depend only on the class map, so each frame gets one Chebyshev distance map to the nearest
/// edge pixel, computed once before the rounds and in parallel row bands (a pixel with an 8-neighbour of another class); boundary at width r ⇔ distance ≤ r−1.
/// Each round is then a masked, separable 3×3 box sum. Scratch is owned by the instance and reused;
/// one instance is not for concurrent use.
/// </remarks>
public sealed class BoundarySuppression
{
    private readonly BoundarySuppressionOptions _options;
    /// <summary>Distances are exact up to this value and clamped to it: no round asks about a larger one.</summary>
    private readonly int _cap;
    private byte[] _distance = [];
    private byte[] _rowDistance = [];
    private byte[] _rowMin = [];
    private float[][] _bandRows = [];

    public BoundarySuppression(BoundarySuppressionOptions options)
    {
        ArgumentNullException.ThrowIfNull(options);
        if (options.Enabled)
        {
            if (options.InitialWidth is < 1 or > 64)
                throw new ScoringInputException(ScoringErrorCodes.Options, $"Boundary width r0 must be 1..64; got {options.InitialWidth}.");
            if (options.WidthStep is < 0 or > 64)
                throw new ScoringInputException(ScoringErrorCodes.Options, $"Boundary width step must be 0..64; got {options.WidthStep}.");
            if (options.Iterations is < 1 or > 64)
                throw new ScoringInputException(ScoringErrorCodes.Options, $"Boundary iterations must be 1..64; got {options.Iterations}.");
        }
        _options = options;
        _cap = Math.Max(1, options.InitialWidth);
    }

    /// <summary>Suppresses boundary scores in place. Does nothing when the options say the stage is disabled.</summary>
    public unsafe void Apply(Span<float> score, ReadOnlySpan<ushort> classIndex, int width, int height)
    {
        FrameBands.CheckSize(width, height, score.Length, "score map");
        FrameBands.CheckSize(width, height, classIndex.Length, "class map");
        if (!_options.Enabled) return;

        int n = width * height;
        if (_distance.Length < n) { _distance = new byte[n]; _rowDistance = new byte[n]; }
        if (_rowMin.Length < height) _rowMin = new byte[height];
        int bands = FrameBands.BandCount(width, height);
        if (_bandRows.Length < bands || (_bandRows.Length > 0 && _bandRows[0].Length < RowScratch(width)))
        {
            _bandRows = new float[bands][];
            for (int b = 0; b < bands; b++) _bandRows[b] = new float[RowScratch(width)];
        }

        fixed (float* scorePtr = score)
        fixed (ushort* classPtr = classIndex)
        fixed (byte* distPtr = _distance)
        fixed (byte* rowMinPtr = _rowMin)
        fixed (byte* rowDistPtr = _rowDistance)
        {
            if (!DistanceToEdges.Compute(classPtr, distPtr, width, height, _cap, bands, rowMinPtr, rowDistPtr)) return;

            // In place is still a synchronous update: a boundary pixel reads only non-boundary pixels, and
            // those do not change during the round. Bands may therefore write their rows while others read them.
            nint values = (nint)scorePtr, dist = (nint)distPtr, rowMin = (nint)rowMinPtr;
            float[][] rows = _bandRows;
            for (int i = 0; i < _options.Iterations; i++)
            {
                int threshold = _options.WidthAt(i) - 1;
                FrameBands.For(bands, height, (b, y0, y1) =>
                {
                    fixed (float* r = rows[b])
                        Round((float*)values, (byte*)dist, (byte*)rowMin, width, height, threshold, y0, y1, r);
                });
            }
        }
    }

    /// <summary>
    /// Per band: masked values, mask, 3 ring rows of horizontal sums of each, one row of zeros, and room for
    /// the row's list of boundary chunks (w/8 + 1 ints fit in w floats).
    /// </summary>
    private static int RowScratch(int width) => 10 * width;

    // Called a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static unsafe void Round(float* values, byte* dist, byte* rowMin, int w, int h, int threshold,
        int y0, int y1, float* rows)
    {
        float* masked = rows, count = rows + w, zero = rows + 8 * w;
        new Span<float>(zero, w).Clear();
        Vector256<int> thr = Vector256.Create(threshold);
        Vector256<byte> ring = Vector256.Create((byte)threshold);
        // Which frame row each ring slot holds (rows are prepared only around rows that have boundary pixels).
        int* slotRow = stackalloc int[3] { -1, -1, -1 };

        float* SumRow(int y) => y < 0 || y >= h ? zero : rows + (2 + y % 3) * w;
        float* CountRow(int y) => y < 0 || y >= h ? zero : rows + (5 + y % 3) * w;

        void Prepare(int y)
        {
            if (y < 0 || y >= h || slotRow[y % 3] == y) return;
            slotRow[y % 3] = y;
            float* v = values + (long)y * w;
            byte* d = dist + (long)y * w;
            float* hs = rows + (2 + y % 3) * w, hc = rows + (5 + y % 3) * w;
            Vector256<float> one = Vector256<float>.One;
            int x = 0;
            for (; x <= w - 8; x += 8)
            {
                var keep = NonBoundaryMask(d + x, thr);
                Vector256.Store(Vector256.Load(v + x) & keep, masked + x);
                Vector256.Store(one & keep, count + x);
            }
            for (; x < w; x++)
            {
                bool nb = d[x] > threshold;
                masked[x] = nb ? v[x] : 0f;
                count[x] = nb ? 1f : 0f;
            }
            HorizontalSum3(masked, hs, w);
            HorizontalSum3(count, hc, w);
        }

        int chunks = w / 8;
        int* boundaryChunks = (int*)(rows + 9 * w);
        for (int y = y0; y < y1; y++)
        {
            if (rowMin[y] > threshold) continue; // no boundary pixel in this row: nothing changes
            float* v = values + (long)y * w;
            byte* d = dist + (long)y * w;

            // Only pixels at distance exactly t can change: the distance map is 1-Lipschitz, so a pixel nearer
            // than t has no neighbour beyond t to take a mean of. Find the 8-pixel chunks holding such a pixel.
            // Few: visit just those, each straight from its 3×3 neighbourhood. Many: whole-row separable sums are
            // cheaper per pixel.
            int found = 0, xc = 0;
            for (; xc + 32 <= chunks * 8; xc += 32)
            {
                uint bits = Vector256.Equals(Vector256.Load(d + xc), ring).ExtractMostSignificantBits();
                if (bits == 0) continue;
                for (int k = 0; k < 4; k++)
                    if ((bits >> (8 * k) & 0xFF) != 0) boundaryChunks[found++] = xc + 8 * k;
            }
            for (; xc < chunks * 8; xc += 8)
                if (Vector64.Equals(Vector64.Load(d + xc), ring.GetLower().GetLower()) != Vector64<byte>.Zero) boundaryChunks[found++] = xc;
            if (found == 0)
            {
                for (int x = chunks * 8; x < w; x++) ScalarPixel(values, dist, w, h, x, y, threshold);
                continue;
            }
            if (found * 5 < chunks * 2)
            {
                float* up = y > 0 ? v - w : zero, dn = y < h - 1 ? v + w : zero;
                byte* dUp = y > 0 ? d - w : (byte*)zero, dDn = y < h - 1 ? d + w : (byte*)zero;
                for (int c = 0; c < found; c++)
                {
                    int x = boundaryChunks[c];
                    if (x >= 1 && x <= w - 9) SparseChunk(v, d, up, dUp, dn, dDn, x, thr);
                    else for (int xx = x; xx < x + 8; xx++) ScalarPixel(values, dist, w, h, xx, y, threshold);
                }
                for (int x = chunks * 8; x < w; x++) ScalarPixel(values, dist, w, h, x, y, threshold);
                continue;
            }

            Prepare(y - 1);
            Prepare(y);
            Prepare(y + 1);
            float* sa = SumRow(y - 1), sb = SumRow(y), sc = SumRow(y + 1);
            float* ca = CountRow(y - 1), cb = CountRow(y), cc = CountRow(y + 1);
            int xv = 0;
            for (; xv <= w - 8; xv += 8)
            {
                var boundary = ~NonBoundaryMask(d + xv, thr);
                if (boundary == Vector256<float>.Zero) continue;
                var sum = Vector256.Load(sa + xv) + Vector256.Load(sb + xv) + Vector256.Load(sc + xv);
                var cnt = Vector256.Load(ca + xv) + Vector256.Load(cb + xv) + Vector256.Load(cc + xv);
                var change = Vector256.GreaterThan(cnt, Vector256<float>.Zero) & boundary;
                Vector256.Store(Vector256.ConditionalSelect(change, sum / cnt, Vector256.Load(v + xv)), v + xv);
            }
            for (; xv < w; xv++)
            {
                float cnt = ca[xv] + cb[xv] + cc[xv];
                if (d[xv] <= threshold && cnt > 0) v[xv] = (sa[xv] + sb[xv] + sc[xv]) / cnt;
            }
        }
    }

    /// <summary>
    /// Eight pixels at x (1 ≤ x ≤ w−9) from their 3×3 neighbourhoods. A missing row comes as a row of zeros:
    /// distance 0 marks it boundary, so it adds nothing.
    /// </summary>
    private static unsafe void SparseChunk(float* v, byte* d, float* up, byte* dUp, float* dn, byte* dDn, int x, Vector256<int> thr)
    {
        var one = Vector256<float>.One;
        var sum = Vector256<float>.Zero;
        var cnt = Vector256<float>.Zero;
        for (int o = -1; o <= 1; o++)
        {
            var m = NonBoundaryMask(dUp + x + o, thr);
            sum += Vector256.Load(up + x + o) & m;
            cnt += one & m;
            m = NonBoundaryMask(d + x + o, thr);
            sum += Vector256.Load(v + x + o) & m;
            cnt += one & m;
            m = NonBoundaryMask(dDn + x + o, thr);
            sum += Vector256.Load(dn + x + o) & m;
            cnt += one & m;
        }
        var change = Vector256.GreaterThan(cnt, Vector256<float>.Zero) & ~NonBoundaryMask(d + x, thr);
        Vector256.Store(Vector256.ConditionalSelect(change, sum / cnt, Vector256.Load(v + x)), v + x);
    }

    private static unsafe void ScalarPixel(float* values, byte* dist, int w, int h, int x, int y, int threshold)
    {
        long i = (long)y * w + x;
        if (dist[i] > threshold) return;
        float sum = 0;
        int count = 0;
        for (int qy = Math.Max(0, y - 1); qy <= Math.Min(h - 1, y + 1); qy++)
            for (int qx = Math.Max(0, x - 1); qx <= Math.Min(w - 1, x + 1); qx++)
            {
                long q = (long)qy * w + qx;
                if (dist[q] > threshold) { sum += values[q]; count++; }
            }
        if (count > 0) values[i] = sum / count;
    }

    /// <summary>out[x] = in[x−1] + in[x] + in[x+1], missing neighbours outside the row count as zero.</summary>
    private static unsafe void HorizontalSum3(float* input, float* output, int w)
    {
        if (w == 1) { output[0] = input[0]; return; }
        output[0] = input[0] + input[1];
        int x = 1;
        for (; x <= w - 9; x += 8)
            Vector256.Store(Vector256.Load(input + x - 1) + Vector256.Load(input + x) + Vector256.Load(input + x + 1), output + x);
        for (; x < w - 1; x++) output[x] = input[x - 1] + input[x] + input[x + 1];
        output[w - 1] = input[w - 2] + input[w - 1];
    }

    /// <summary>All-ones lanes where the 8 distances at <paramref name="d"/> exceed the threshold (not a boundary).</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static unsafe Vector256<float> NonBoundaryMask(byte* d, Vector256<int> threshold)
    {
        Vector256<int> di;
        if (Avx2.IsSupported)
            di = Avx2.ConvertToVector256Int32(d);
        else
        {
            var u = Vector128.WidenLower(Vector128.CreateScalarUnsafe(Unsafe.ReadUnaligned<ulong>(d)).AsByte());
            di = Vector256.Create(Vector128.WidenLower(u), Vector128.WidenUpper(u)).AsInt32();
        }
        return Vector256.GreaterThan(di, threshold).AsSingle();
    }
}
