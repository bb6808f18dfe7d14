using OpenCvSharp;
using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;

namespace Strayspot.Tests.Scoring.Evaluation;

public class RegionMetricsTests
{
    /// <summary>Rows of '.', '#' (1) and 'x' (255 ignore).</summary>
    private static (byte[] Data, int W, int H) Mask(params string[] rows)
    {
        int w = rows[0].Length, h = rows.Length;
        var d = new byte[w * h];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
                d[y * w + x] = rows[y][x] switch { '.' => 0, '#' => 1, 'x' => 255, var c => throw new ArgumentException(c.ToString()) };
        return (d, w, h);
    }

    private static (RegionFrameScores Frame, RegionMetricsResult All) One(string[] pred, string[] gt)
    {
        var (p, w, h) = Mask(pred);
        var (g, _, _) = Mask(gt);
        var m = new RegionMetrics();
        var f = m.Add(p, g, w, h);
        return (f, m.Compute());
    }

    private static double[] F1s(RegionMetricsResult r) => r.Levels.Select(l => l.F1!.Value).ToArray();

    [Fact]
    public void Perfect_match_scores_one_everywhere()
    {
        string[] both = ["......", ".###..", ".###..", "......"];
        var (f, r) = One(both, both);
        Assert.Equal([1.0], f.SIoU);
        Assert.Equal([1.0], f.Ppv);
        Assert.All(F1s(r), v => Assert.Equal(1.0, v));
        Assert.Equal(1.0, r.MeanF1);
    }

    [Fact]
    public void One_prediction_over_two_objects_charges_each_only_the_background_it_adds()
    {
        // Two 2×2 objects with a one-column gap; one 5×2 prediction covers both and the gap (2 background pixels).
        // sIoU(K) = |K ∩ P| / (|K| + background of P) = 4 / (4 + 2) = 2/3 for each; a plain IoU would give 4/10.
        // PPV(P) = 8 / 10. TP = 2 while 2/3 > τ (τ ≤ 0.65), else FN = 2; FP = 0 (0.8 > every τ).
        // F1 = 1 for the 9 levels 0.25..0.65 and 0 for 0.70, 0.75 → mean 9/11.
        var (f, r) = One(
            [".......", ".#####.", ".#####.", "......."],
            [".......", ".##.##.", ".##.##.", "......."]);
        Assert.Equal(2, f.SIoU.Count);
        Assert.All(f.SIoU, v => Assert.Equal(2.0 / 3, v, 12));
        Assert.Equal([0.8], f.Ppv);
        Assert.Equal([1, 1, 1, 1, 1, 1, 1, 1, 1, 0, 0], F1s(r));
        Assert.Equal(9.0 / 11, r.MeanF1!.Value, 12);
        Assert.Equal((0L, 2L, 0L), (r.Levels[10].TruePositives, r.Levels[10].FalseNegatives, r.Levels[10].FalsePositives));
    }

    [Fact]
    public void Half_overlapping_prediction()
    {
        // GT 4×2 (8 px) at columns 0–3, prediction 4×2 at columns 2–5: overlap 4, prediction background 4.
        // sIoU = 4 / (8 + 4) = 1/3; PPV = 4/8 = 1/2.
        // τ 0.25, 0.30: TP 1 → F1 1. τ 0.35..0.45: FN 1, FP 0 → F1 0. τ ≥ 0.50: FN 1, FP 1 (½ ≤ τ) → F1 0.
        var (f, r) = One(["..####..", "..####..", "........"], ["####....", "####....", "........"]);
        Assert.Equal(1.0 / 3, f.SIoU[0], 12);
        Assert.Equal(0.5, f.Ppv[0], 12);
        Assert.Equal([1, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0], F1s(r));
        Assert.Equal((0L, 1L, 0L), (r.Levels[2].TruePositives, r.Levels[2].FalseNegatives, r.Levels[2].FalsePositives));
        Assert.Equal((0L, 1L, 1L), (r.Levels[5].TruePositives, r.Levels[5].FalseNegatives, r.Levels[5].FalsePositives));
        Assert.Equal(2.0 / 11, r.MeanF1!.Value, 12);
    }

    [Fact]
    public void False_positive_blob_costs_one_fp_at_every_level()
    {
        // Object matched exactly (sIoU 1, PPV 1) plus a 3-pixel blob on background (PPV 0): TP 1, FN 0, FP 1,
        // F1 = 2/(2+0+1) = 2/3 at every level.
        var (f, r) = One(["##....", "##..#.", "....##"], ["##....", "##....", "......"]);
        Assert.Equal([1.0], f.SIoU);
        Assert.Equal([1.0, 0.0], f.Ppv);
        Assert.All(F1s(r), v => Assert.Equal(2.0 / 3, v, 12));
        Assert.Equal(0.5, r.MeanPpv);
    }

    [Fact]
    public void Ignore_pixels_count_nowhere_and_a_prediction_only_on_them_is_dropped()
    {
        // The prediction covers the 2×2 object and 12 ignore pixels around it: sIoU 4/4, PPV 4/4.
        // The blob at the right lies on ignore pixels only: no PPV, no FP. Were the ring background,
        // sIoU would be 4/16 = 0.25 and PPV 0.25.
        var (f, r) = One(
            ["####..#", "####..#", "####...", "####..."],
            ["xxxx..x", "x##x..x", "x##x...", "xxxx..."]);
        Assert.Equal([1.0], f.SIoU);
        Assert.Equal([1.0], f.Ppv);
        Assert.Equal(1.0, r.MeanF1);
        var (f2, _) = One(
            ["####...", "####...", "####...", "####..."],
            [".......", ".##....", ".##....", "......."]);
        Assert.Equal(0.25, f2.SIoU[0], 12);
        Assert.Equal(0.25, f2.Ppv[0], 12);
    }

    [Fact]
    public void Missed_object_and_diagonal_contact_are_handled()
    {
        // Diagonal pixels are one 8-connected component; the second object is missed (sIoU 0 → FN everywhere).
        var (f, r) = One(["#.....", ".#....", "......"], ["#.....", ".#..#.", "......"]);
        Assert.Equal([1.0, 0.0], f.SIoU);
        Assert.All(r.Levels, l => Assert.Equal((1L, 1L, 0L), (l.TruePositives, l.FalseNegatives, l.FalsePositives)));
        Assert.All(F1s(r), v => Assert.Equal(2.0 / 3, v, 12));
    }

    [Fact]
    public void Counts_are_summed_over_frames_and_merge_equals_one_accumulator()
    {
        var (p1, w, h) = Mask("##....", "##..#.", "....##");
        var (g1, _, _) = Mask("##....", "##....", "......");
        var (p2, _, _) = Mask("......", "......", "......");
        var (g2, _, _) = Mask("......", "...##.", "......");
        var one = new RegionMetrics();
        one.Add(p1, g1, w, h);
        one.Add(p2, g2, w, h);
        var a = new RegionMetrics();
        var b = new RegionMetrics();
        a.Add(p1, g1, w, h);
        b.Add(p2, g2, w, h);
        a.Merge(b);
        var r = one.Compute();
        // Frame 1: TP 1, FP 1; frame 2: FN 1 → F1 = 2/(2+1+1) = 1/2.
        Assert.All(F1s(r), v => Assert.Equal(0.5, v, 12));
        Assert.Equal(2, r.Frames);
        Assert.Equal(r.MeanF1, a.Compute().MeanF1);
        Assert.Equal(r.Levels, a.Compute().Levels);
    }

    [Fact]
    public void No_components_at_all_leaves_f1_undefined_rather_than_invented()
    {
        var (_, r) = One(["...", "..."], ["...", "..x"]);
        Assert.Null(r.MeanF1);
        Assert.Null(r.MeanSIoU);
        Assert.All(r.Levels, l => Assert.Null(l.F1));
    }

    [Fact]
    public void Bad_frames_are_refused_with_their_numbers()
    {
        var m = new RegionMetrics();
        var size = Assert.Throws<ScoringInputException>(() => m.Add(new byte[6], new byte[6], 4, 2));
        Assert.Equal(ScoringErrorCodes.FrameSize, size.Code);
        Assert.Contains("4×2", size.Message);
        var pred = Assert.Throws<ScoringInputException>(() => m.Add([0, 1, 255, 0], new byte[4], 2, 2));
        Assert.Equal(EvaluationErrorCodes.LabelValue, pred.Code);
        Assert.Contains("got 255 at position 2", pred.Message);
        var gt = Assert.Throws<ScoringInputException>(() => m.Add(new byte[4], [0, 0, 0, 3], 2, 2));
        Assert.Contains("got 3 at position 3", gt.Message);
        Assert.Equal(0, m.Frames);
    }

    [Theory]
    [InlineData(1, 1, 0.5)]
    [InlineData(37, 1, 0.5)]
    [InlineData(1, 29, 0.5)]
    [InlineData(64, 48, 0.3)]
    [InlineData(64, 48, 0.55)]
    [InlineData(200, 150, 0.45)]
    public void Labeller_partitions_like_OpenCV_connected_components_8(int w, int h, double density)
    {
        // Reference: OpenCV's connectedComponents with connectivity 8 (via OpenCvSharp4).
        var labeller = new ComponentLabeller();
        for (int seed = 0; seed < 5; seed++)
        {
            var rng = new Random(seed * 1000 + w);
            var mask = new byte[w * h];
            for (int i = 0; i < mask.Length; i++) mask[i] = rng.NextDouble() < density ? (byte)1 : (byte)0;
            var ours = new int[mask.Length];
            int count = labeller.Label(mask, 1, w, h, ours);
            using var src = Mat.FromPixelData(h, w, MatType.CV_8UC1, mask);
            using var cvLabels = new Mat();
            int cvCount = Cv2.ConnectedComponents(src, cvLabels, PixelConnectivity.Connectivity8, MatType.CV_32S) - 1;
            Assert.Equal(cvCount, count);
            cvLabels.GetArray(out int[] theirs);
            // Same partition: a one-to-one map between our ids and theirs, background on both sides.
            var map = new Dictionary<int, int>();
            var back = new Dictionary<int, int>();
            for (int i = 0; i < mask.Length; i++)
            {
                Assert.Equal(ours[i] == 0, theirs[i] == 0);
                if (ours[i] == 0) continue;
                Assert.InRange(ours[i], 1, count);
                Assert.Equal(theirs[i], map.TryAdd(ours[i], theirs[i]) ? theirs[i] : map[ours[i]]);
                Assert.Equal(ours[i], back.TryAdd(theirs[i], ours[i]) ? ours[i] : back[theirs[i]]);
            }
        }
    }
}
