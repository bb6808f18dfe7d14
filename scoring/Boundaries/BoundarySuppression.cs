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
/// edge pixel (a pixel with an 8-neighbour of another class); boundary at width r ⇔ distance ≤ r−1.
/// Each round is then a masked, separable 3×3 box sum. Scratch is owned by the instance and reused;
/// one instance is not for concurrent use.
/// </remarks>
public sealed class BoundarySuppression
{
    private readonly BoundarySuppressionOptions _options;
    /// <summary>Distances are exact up to this value and clamped to it: no round asks about a larger one.</summary>
    private readonly int _cap;
    private byte[] _distance = [];
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
        if (_distance.Length < n) _distance = new byte[n];
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
        {
            if (!DistanceToEdges.Compute(classPtr, distPtr, width, height, _cap, bands, rowMinPtr)) return;

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

    /// <summary>Per band: masked values, mask, 3 ring rows of horizontal sums of each, one row of zeros.</summary>
    private static int RowScratch(int width) => 9 * width;

    private static unsafe void Round(float* values, byte* dist, byte* rowMin, int w, int h, int threshold,
        int y0, int y1, float* rows)
    {
        float* masked = rows, count = rows + w, zero = rows + 8 * w;
        new Span<float>(zero, w).Clear();
        Vector256<int> thr = Vector256.Create(threshold);
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

        for (int y = y0; y < y1; y++)
        {
            if (rowMin[y] > threshold) continue; // no boundary pixel in this row: nothing changes
            Prepare(y - 1);
            Prepare(y);
            Prepare(y + 1);
            float* sa = SumRow(y - 1), sb = SumRow(y), sc = SumRow(y + 1);
            float* ca = CountRow(y - 1), cb = CountRow(y), cc = CountRow(y + 1);
            float* v = values + (long)y * w;
            byte* d = dist + (long)y * w;
            int x = 0;
            for (; x <= w - 8; x += 8)
            {
                var boundary = ~NonBoundaryMask(d + x, thr);
                if (boundary == Vector256<float>.Zero) continue;
                var sum = Vector256.Load(sa + x) + Vector256.Load(sb + x) + Vector256.Load(sc + x);
                var cnt = Vector256.Load(ca + x) + Vector256.Load(cb + x) + Vector256.Load(cc + x);
                var change = Vector256.GreaterThan(cnt, Vector256<float>.Zero) & boundary;
                Vector256.Store(Vector256.ConditionalSelect(change, sum / cnt, Vector256.Load(v + x)), v + x);
            }
            for (; x < w; x++)
            {
                float cnt = ca[x] + cb[x] + cc[x];
                if (d[x] <= threshold && cnt > 0) v[x] = (sa[x] + sb[x] + sc[x]) / cnt;
            }
        }
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
