using System.Numerics.Tensors;
using System.Runtime.InteropServices;
using Strayspot.Scoring.Boundaries;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Reduction;
using Strayspot.Scoring.Smoothing;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Bench;

/// <summary>
/// The chain's stages on the chain bench's logits with their 512-bit kernels and with the 256-bit ones they replace,
/// alternated run by run in one process and timed in CPU time of the process (every thread) rather than wall time:
/// on a machine shared with other work the wall clock mostly measures the neighbours. Run it single-threaded
/// (<c>DOTNET_PROCESSOR_COUNT=1</c>) so every stage's work lands on the timed process without scheduling noise.
/// </summary>
public static class ChainKernelsBench
{
    [DllImport("libc", EntryPoint = "clock_gettime")]
    private static extern unsafe int ClockGetTime(int clock, long* timespec);

    private const int ProcessCpuClock = 2; // CLOCK_PROCESS_CPUTIME_ID on Linux

    private static unsafe double CpuMs()
    {
        long* t = stackalloc long[2];
        return ClockGetTime(ProcessCpuClock, t) == 0 ? t[0] * 1e3 + t[1] / 1e6 : double.NaN;
    }

    public static void Run(int runs)
    {
        const int classes = 19;
        var stats = ScoringBench.Statistics(classes);
        var options = new ScoringOptions { Method = ScoreMethod.Sml };
        Console.WriteLine();
        Console.WriteLine($"Chain kernels: 256-bit against 512-bit (512-bit vectors accelerated: {System.Runtime.Intrinsics.Vector512.IsHardwareAccelerated}), CPU ms of the process, {Environment.ProcessorCount} processor(s), C={classes}.");
        Console.WriteLine();
        Console.WriteLine("| case | logits | reduction 256 → 512 | SML + negation → one-pass SML | BS 256 → 512 | DS 256 → 512 |");
        Console.WriteLine("|---|---|---|---|---|---|");
        // The first pass compiles every kernel fully; only the second is printed.
        for (int pass = 0; pass < 2; pass++)
            foreach (var (label, h, w, fh, fw) in new[] { ("A: 256×512 → 1024×2048", 256, 512, 1024, 2048), ("B: 512×1024 at frame size", 512, 1024, 512, 1024) })
                foreach (var kind in new[] { "smooth, network-like", "random-like" })
                {
                    var data = kind.StartsWith("smooth") ? SyntheticLogits.Make(classes, h, w, seed: 7) : PostHocChainBench.RandomLogits(classes, h, w, seed: 8);
                    var logits = new LogitsView(data, classes, h, w);
                    var reduction = new PixelReduction();
                    var maps = new ReducedMaps();
                    var sml = new StandardizedMaxLogit(stats);
                    int n = fw * fh;
                    var score = new float[n];
                    var standardized = new float[n];
                    var boundary = new BoundarySuppression(options.BoundarySuppression);
                    var smoothing = new DilatedSmoothing(options.Smoothing);
                    reduction.Reduce(logits, fh, fw, maps);
                    sml.ApplyNegated(maps.MaxLogit, maps.ClassIndex, standardized);
                    var t = Alternate(runs,
                        () => { PixelReduction.WideKernels = false; reduction.Reduce(logits, fh, fw, maps); PixelReduction.WideKernels = true; },
                        () => reduction.Reduce(logits, fh, fw, maps),
                        () =>
                        {
                            StandardizedMaxLogit.WideKernels = false;
                            sml.Apply(maps.MaxLogit, maps.ClassIndex, score);
                            TensorPrimitives.Negate(score, score);
                            StandardizedMaxLogit.WideKernels = true;
                        },
                        () => sml.ApplyNegated(maps.MaxLogit, maps.ClassIndex, score),
                        () => { BoundarySuppression.WideKernels = false; standardized.CopyTo(score); boundary.Apply(score, maps.ClassIndex, fw, fh); BoundarySuppression.WideKernels = true; },
                        () => { standardized.CopyTo(score); boundary.Apply(score, maps.ClassIndex, fw, fh); },
                        () => { DilatedSmoothing.WideKernels = false; standardized.CopyTo(score); smoothing.Apply(score, fw, fh); DilatedSmoothing.WideKernels = true; },
                        () => { standardized.CopyTo(score); smoothing.Apply(score, fw, fh); });
                    if (pass == 1)
                        Console.WriteLine($"| {label} | {kind} | {t[0]:0.00} → {t[1]:0.00} | {t[2]:0.00} → {t[3]:0.00} | {t[4]:0.00} → {t[5]:0.00} | {t[6]:0.00} → {t[7]:0.00} |");
                }
        Console.WriteLine();
        Console.WriteLine("Medians of alternating runs after two warm-up rounds. The reduction column is the same code on resized logits (case A):");
        Console.WriteLine("only the frame-sized path has a 512-bit kernel. BS and DS times include copying the standardized map back first.");
    }

    /// <summary>Runs the actions in turn, round after round; the median CPU time of each.</summary>
    private static double[] Alternate(int runs, params Action[] actions)
    {
        var times = new List<double>[actions.Length];
        for (int a = 0; a < actions.Length; a++) times[a] = new List<double>(runs);
        for (int r = 0; r < runs + 2; r++)
            for (int a = 0; a < actions.Length; a++)
            {
                double start = CpuMs();
                actions[a]();
                double ms = CpuMs() - start;
                if (r >= 2) times[a].Add(ms);
            }
        var medians = new double[actions.Length];
        for (int a = 0; a < actions.Length; a++) medians[a] = Measure.Median(times[a]);
        return medians;
    }
}
