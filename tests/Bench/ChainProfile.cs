using Strayspot.Scoring.Boundaries;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Reduction;
using Strayspot.Scoring.Regions;
using Strayspot.Scoring.Smoothing;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Bench;

public static class ChainProfile
{
    public static unsafe void Run(int runs)
    {
        var stats = ScoringBench.Statistics(19);
        var options = new ScoringOptions { Method = ScoreMethod.Sml };
        for (int pass = 0; pass < 2; pass++)
        foreach (var (label, h, w, fh, fw) in new[] { ("A", 256, 512, 1024, 2048), ("B", 512, 1024, 512, 1024) })
        foreach (var kind in new[] { "smooth", "random" })
        {
            var data = kind == "smooth" ? SyntheticLogits.Make(19, h, w, 7) : PostHocChainBench.RandomLogits(19, h, w, 8);
            var logits = new LogitsView(data, 19, h, w);
            var red = new PixelReduction();
            var maps = new ReducedMaps();
            maps.EnsureSize(fw, fh, ReductionOutputs.None);
            var sml = new StandardizedMaxLogit(stats);
            int n = fw * fh;
            var score = new float[n]; var s0 = new float[n]; var mask = new byte[n];
            var bs = new BoundarySuppression(options.BoundarySuppression);
            var ds = new DilatedSmoothing(options.Smoothing);
            var rf = new RegionFinder();
            var dist = new byte[n]; var rd = new byte[n]; var rm = new byte[fh];
            red.Reduce(logits, fh, fw, maps);
            ScoringMethods.Of(ScoreMethod.Sml).Kernel(maps, sml, 0, s0);
            s0.CopyTo(score); bs.Apply(score, maps.ClassIndex, fw, fh); ds.Apply(score, fw, fh);
            var sorted = (float[])score.Clone(); Array.Sort(sorted); float thr = sorted[(int)(n * 0.95)];
            var filter = options.RegionFilter();
            var t = new List<(string, double)>();
            t.Add(("reduce", Measure.MedianMs(runs, () => red.Reduce(logits, fh, fw, maps))));
            t.Add(("finite", Measure.MedianMs(runs, () => LogitsValidation.EnsureFinite(logits))));
            t.Add(("smlApply", Measure.MedianMs(runs, () => sml.Apply(maps.MaxLogit, maps.ClassIndex, score))));
            t.Add(("smlKernel", Measure.MedianMs(runs, () => ScoringMethods.Of(ScoreMethod.Sml).Kernel(maps, sml, 0, score))));
            int bands = FrameBands.BandCount(fw, fh);
            t.Add(("dist", Measure.MedianMs(runs, () => { fixed (ushort* c = maps.ClassIndex) fixed (byte* d = dist) fixed (byte* r = rm) fixed (byte* q = rd) DistanceToEdges.Compute(c, d, fw, fh, 4, bands, r, q); })));
            t.Add(("dist1", Measure.MedianMs(runs, () => { fixed (ushort* c = maps.ClassIndex) fixed (byte* d = dist) fixed (byte* r = rm) fixed (byte* q = rd) DistanceToEdges.Compute(c, d, fw, fh, 4, 1, r, q); })));
            t.Add(("bs", Measure.MedianMs(runs, () => { s0.CopyTo(score); bs.Apply(score, maps.ClassIndex, fw, fh); })));
            t.Add(("copy", Measure.MedianMs(runs, () => s0.CopyTo(score))));
            t.Add(("ds", Measure.MedianMs(runs, () => ds.Apply(score, fw, fh))));
            t.Add(("thr", Measure.MedianMs(runs, () => AnomalyMask.Threshold(score, thr, mask))));
            t.Add(("regions", Measure.MedianMs(runs, () => rf.Find(mask, fw, fh, score, maps.ClassIndex, 19, filter))));
            t.Add(("fscore", Measure.MedianMs(runs, () => FrameScore.Compute(score))));
            if (pass == 1) Console.WriteLine($"{label} {kind}: " + string.Join(", ", t.Select(x => $"{x.Item1} {x.Item2:0.00}")));
        }
    }
}
