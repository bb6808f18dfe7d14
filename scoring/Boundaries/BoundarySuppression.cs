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
    /// <summary>Off: 256-bit kernels only (the tests compare both; the bench measures both in one process).</summary>
    internal static bool WideKernels = true;

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
        // Widths never grow from round to round; a round that repeats the previous width recomputes the same means
        // from the same unchanged pixels, so only the distinct thresholds matter.
        Span<int> thresholds = stackalloc int[_options.Iterations];
        int rounds = 0;
        for (int i = 0; i < _options.Iterations; i++)
        {
            int t = _options.WidthAt(i) - 1;
            if (rounds == 0 || t < thresholds[rounds - 1]) thresholds[rounds++] = t;
        }
        int bands = FrameBands.BandCount(width, height);
        // Bands must be taller than the seams between them (rounds−1 rows on each side).
        if (bands > 1 && height / bands < 2 * rounds) bands = Math.Max(1, height / (2 * rounds));
        int scratch = RowScratch(width, rounds);
        if (_bandRows.Length < bands || (_bandRows.Length > 0 && _bandRows[0].Length < scratch))
        {
            _bandRows = new float[bands][];
            for (int b = 0; b < bands; b++) _bandRows[b] = new float[scratch];
        }

        fixed (float* scorePtr = score)
        fixed (ushort* classPtr = classIndex)
        fixed (byte* distPtr = _distance)
        fixed (byte* rowMinPtr = _rowMin)
        fixed (byte* rowDistPtr = _rowDistance)
        {
            if (!DistanceToEdges.Compute(classPtr, distPtr, width, height, _cap, bands, rowMinPtr, rowDistPtr)) return;

            // Round i changes only pixels at distance exactly t_i and reads only pixels farther than t_i, which
            // earlier rounds have finished: so row y may run round i as soon as rows y−1..y+1 have run rounds
            // before i. One sweep down the rows runs all rounds (round i trails round 0 by i rows) while the rows
            // are in cache. Inside a band, a row k rows from the band's edge runs rounds 0..k (round 0 reads only
            // pixels that never change, also across the edge); the seams then finish the rest, each seam alone.
            nint values = (nint)scorePtr, dist = (nint)distPtr, rowMin = (nint)rowMinPtr;
            float[][] rows = _bandRows;
            int[] thr = thresholds[..rounds].ToArray();
            FrameBands.For(bands, height, (b, y0, y1) =>
            {
                fixed (float* r = rows[b])
                {
                    int* slots = stackalloc int[3 * thr.Length];
                    var sweep = new Sweep((float*)values, (byte*)dist, (byte*)rowMin, width, height, thr, r, slots);
                    int top = y0 == 0 ? int.MinValue / 2 : y0, bottom = y1 == height ? int.MaxValue / 2 : y1 - 1;
                    for (int step = y0; step < y1 + thr.Length - 1; step++)
                        for (int i = 0; i < thr.Length; i++)
                        {
                            int y = step - i;
                            if (y < y0 || y >= y1 || i > Math.Min(y - top, bottom - y)) continue;
                            sweep.Row(i, y);
                        }
                }
            });
            if (bands > 1 && thr.Length > 1)
                FrameBands.For(bands - 1, bands - 1, (s, _, _) =>
                {
                    var (edge, _) = FrameBands.Band(s + 1, bands, height);
                    var (above, _) = FrameBands.Band(s, bands, height);
                    var (_, below) = FrameBands.Band(s + 1, bands, height);
                    fixed (float* r = rows[s])
                    {
                        int* slots = stackalloc int[3 * thr.Length];
                    var sweep = new Sweep((float*)values, (byte*)dist, (byte*)rowMin, width, height, thr, r, slots);
                        for (int i = 1; i < thr.Length; i++)
                            for (int y = edge - i; y < edge + i; y++)
                            {
                                // Rows k from their own band's edge ran rounds 0..k in the bands.
                                int k = y < edge ? Math.Min(edge - 1 - y, y - (above == 0 ? int.MinValue / 2 : above))
                                                 : Math.Min(y - edge, (below == height ? int.MaxValue / 2 : below - 1) - y);
                                if (i > k) sweep.Row(i, y);
                            }
                    }
                });
        }
    }

    /// <summary>
    /// Per band: masked values, mask, one row of zeros, room for the row's list of boundary chunks (w/8 + 1 ints
    /// fit in w floats), then per round 3 ring rows of horizontal sums of each of values and mask.
    /// </summary>
    private static int RowScratch(int width, int rounds) => (4 + 6 * rounds) * width;

    /// <summary>One band's scratch and the frame, for running any round on any row.</summary>
    private unsafe struct Sweep
    {
        private readonly float* _values, _rows;
        private readonly byte* _dist, _rowMin;
        private readonly int _w, _h;
        private readonly int[] _thresholds;
        /// <summary>Which frame row each round's ring slot holds (−1: none); 3 per round, on the caller's stack.</summary>
        private readonly int* _slotRow;

        public Sweep(float* values, byte* dist, byte* rowMin, int w, int h, int[] thresholds, float* rows, int* slotRow)
        {
            _values = values; _dist = dist; _rowMin = rowMin; _w = w; _h = h; _thresholds = thresholds; _rows = rows;
            _slotRow = slotRow;
            new Span<int>(slotRow, 3 * thresholds.Length).Fill(-1);
            new Span<float>(rows + 2 * w, w).Clear();
        }

        public void Row(int round, int y) =>
            RoundRow(_values, _dist, _rowMin, _w, _h, _thresholds[round], y, _rows, _rows + (4 + 6 * round) * _w, _slotRow + 3 * round);
    }

    // Called for every row of every frame: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static unsafe void RoundRow(float* values, byte* dist, byte* rowMin, int w, int h, int threshold, int y,
        float* rows, float* ringRows, int* slotRow)
    {
        if (rowMin[y] > threshold) return; // no boundary pixel in this row: nothing changes
        float* masked = rows, count = rows + w, zero = rows + 2 * w;
        Vector256<int> thr = Vector256.Create(threshold);
        Vector256<byte> ring = Vector256.Create((byte)threshold);

        float* SumRow(int yy) => yy < 0 || yy >= h ? zero : ringRows + (yy % 3) * w;
        float* CountRow(int yy) => yy < 0 || yy >= h ? zero : ringRows + (3 + yy % 3) * w;

        int chunks = w / 8;
        int* boundaryChunks = (int*)(rows + 3 * w);
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
            return;
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
            return;
        }

        bool wide = Avx512F.IsSupported && WideKernels;
        var thrWide = Vector512.Create(threshold);
        // The masked sums of a row hold only pixels beyond t, which no longer change once the row is prepared.
        for (int yy = y - 1; yy <= y + 1; yy++)
        {
            if (yy < 0 || yy >= h || slotRow[yy % 3] == yy) continue;
            slotRow[yy % 3] = yy;
            float* pv = values + (long)yy * w;
            byte* pd = dist + (long)yy * w;
            Vector256<float> one = Vector256<float>.One;
            int x = 0;
            if (wide)
                for (; x <= w - 16; x += 16)
                {
                    var keep = NonBoundaryMask16(pd + x, thrWide);
                    Vector512.Store(Vector512.Load(pv + x) & keep, masked + x);
                    Vector512.Store(Vector512<float>.One & keep, count + x);
                }
            for (; x <= w - 8; x += 8)
            {
                var keep = NonBoundaryMask(pd + x, thr);
                Vector256.Store(Vector256.Load(pv + x) & keep, masked + x);
                Vector256.Store(one & keep, count + x);
            }
            for (; x < w; x++)
            {
                bool nb = pd[x] > threshold;
                masked[x] = nb ? pv[x] : 0f;
                count[x] = nb ? 1f : 0f;
            }
            HorizontalSum3(masked, SumRow(yy), w, wide);
            HorizontalSum3(count, CountRow(yy), w, wide);
        }
        float* sa = SumRow(y - 1), sb = SumRow(y), sc = SumRow(y + 1);
        float* ca = CountRow(y - 1), cb = CountRow(y), cc = CountRow(y + 1);
        int xv = 0;
        if (wide)
            for (; xv <= w - 16; xv += 16)
            {
                var boundary = ~NonBoundaryMask16(d + xv, thrWide);
                if (boundary == Vector512<float>.Zero) continue;
                var sum = Vector512.Load(sa + xv) + Vector512.Load(sb + xv) + Vector512.Load(sc + xv);
                var cnt = Vector512.Load(ca + xv) + Vector512.Load(cb + xv) + Vector512.Load(cc + xv);
                var change = Vector512.GreaterThan(cnt, Vector512<float>.Zero) & boundary;
                Vector512.Store(Vector512.ConditionalSelect(change, sum / cnt, Vector512.Load(v + xv)), v + xv);
            }
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
    private static unsafe void HorizontalSum3(float* input, float* output, int w, bool wide)
    {
        if (w == 1) { output[0] = input[0]; return; }
        output[0] = input[0] + input[1];
        int x = 1;
        if (wide)
            for (; x <= w - 17; x += 16)
                Vector512.Store(Vector512.Load(input + x - 1) + Vector512.Load(input + x) + Vector512.Load(input + x + 1), output + x);
        for (; x <= w - 9; x += 8)
            Vector256.Store(Vector256.Load(input + x - 1) + Vector256.Load(input + x) + Vector256.Load(input + x + 1), output + x);
        for (; x < w - 1; x++) output[x] = input[x - 1] + input[x] + input[x + 1];
        output[w - 1] = input[w - 2] + input[w - 1];
    }

    /// <summary>The same for 16 distances (512-bit kernels: half the instructions per pixel, the same arithmetic per lane).</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static unsafe Vector512<float> NonBoundaryMask16(byte* d, Vector512<int> threshold) =>
        Vector512.GreaterThan(Avx512F.ConvertToVector512Int32(Vector128.Load(d)), threshold).AsSingle();

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
