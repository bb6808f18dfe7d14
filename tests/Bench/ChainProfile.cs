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
    [System.Runtime.InteropServices.DllImport("libc")]
    private static extern unsafe int clock_gettime(int clock, long* ts);

    /// <summary>CPU time of the whole process in ms (every thread), nanosecond resolution.</summary>
    private static unsafe double Cpu() { long* t = stackalloc long[2]; clock_gettime(2, t); return t[0] * 1e3 + t[1] / 1e6; }

    /// <summary>Alternates the actions run by run; prints min and median of each (CPU ms of the process).</summary>
    private static string Alt(int runs, params (string Name, Action Act)[] acts)
    {
        var times = acts.Select(_ => new List<double>()).ToArray();
        for (int r = 0; r < runs + 2; r++)
            for (int a = 0; a < acts.Length; a++)
            {
                double t = Cpu();
                acts[a].Act();
                double ms = Cpu() - t;
                if (r >= 2) times[a].Add(ms);
            }
        return string.Join(", ", acts.Select((a, i) => $"{a.Name} {times[i].Min():0.00}/{Measure.Median(times[i]):0.00}"));
    }

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
            red.Reduce(logits, fh, fw, maps);
            sml.ApplyNegated(maps.MaxLogit, maps.ClassIndex, s0);
            s0.CopyTo(score); bs.Apply(score, maps.ClassIndex, fw, fh); ds.Apply(score, fw, fh);
            var sorted = (float[])score.Clone(); Array.Sort(sorted); float thr = sorted[(int)(n * 0.95)];
            var filter = options.RegionFilter();
            string line = Alt(runs,
                ("reduce256", () => { PixelReduction.WideKernels = false; red.Reduce(logits, fh, fw, maps); PixelReduction.WideKernels = true; }),
                ("sml256+negate", () => { StandardizedMaxLogit.WideKernels = false; sml.Apply(maps.MaxLogit, maps.ClassIndex, score); System.Numerics.Tensors.TensorPrimitives.Negate(score, score); StandardizedMaxLogit.WideKernels = true; }),
                ("smlNeg512", () => sml.ApplyNegated(maps.MaxLogit, maps.ClassIndex, score)),
                ("reduce+negated", () => { red.Reduce(logits, fh, fw, maps); if (fh != h) LogitsValidation.EnsureFinite(logits); sml.ApplyNegated(maps.MaxLogit, maps.ClassIndex, score); }),
                ("reduce", () => red.Reduce(logits, fh, fw, maps)),
                ("bs256", () => { BoundarySuppression.WideKernels = false; s0.CopyTo(score); bs.Apply(score, maps.ClassIndex, fw, fh); BoundarySuppression.WideKernels = true; }),
                ("bs", () => { s0.CopyTo(score); bs.Apply(score, maps.ClassIndex, fw, fh); }),
                ("ds256", () => { DilatedSmoothing.WideKernels = false; ds.Apply(score, fw, fh); DilatedSmoothing.WideKernels = true; }),
                ("ds", () => ds.Apply(score, fw, fh)),
                ("regions", () => { AnomalyMask.Threshold(score, thr, mask); rf.Find(mask, fw, fh, score, maps.ClassIndex, 19, filter); FrameScore.Compute(score); }));
            if (pass == 1) Console.WriteLine($"{label} {kind} (V512 {System.Runtime.Intrinsics.Vector512.IsHardwareAccelerated}): {line}");
        }
    }
}
