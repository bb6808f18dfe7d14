using System.Diagnostics;

namespace Strayspot.Bench;

/// <summary>
/// <c>issue-tables</c>: the post-hoc chain against OpenCV and the throughput-and-memory suite in one run, then one
/// table of the throughput-and-memory goals with what this run measured: Markdown to paste into the README.
/// </summary>
public static class IssueTables
{
    public static void Run(int runs, int? framesAtOnce, bool memoryPattern, int? networkRuns, int? intraOp = null)
    {
        var clock = Stopwatch.StartNew();
        string loadBefore = LoadAverage();
        var chain = PostHocChainBench.Run(runs);
        var load = LoadBench.Run(runs, framesAtOnce, memoryPattern, networkRuns, intraOp);
        DecodeBench.PixelLoops(runs);

        Console.WriteLine();
        Console.WriteLine("| goal | target | this run | met |");
        Console.WriteLine("|---|---|---|---|");
        foreach (string c in chain.Select(r => r.Case).Distinct())
        {
            var of = chain.Where(r => r.Case == c).ToList();
            double low = of.Min(r => r.Ratio);
            Console.WriteLine($"| post-hoc chain against OpenCV, case {c} | ≥ 5× | {string.Join(", ", of.Select(r => $"{r.Ratio:0.0}× {r.Kind}"))} | {(low >= 5 ? "yes" : "no")} |");
        }
        var ratios = load.Service.Select(r => r.Fps / load.NetworkFps).ToList();
        Console.WriteLine($"| service / network alone at {string.Join(", ", load.Service.Select(r => r.Clients))} clients | ≥ 0.85 | " +
            $"{string.Join(", ", ratios.Select(r => r.ToString("0.00")))} (network alone {load.NetworkFps:0.0} frames/s, median of the same rounds); " +
            $"CPU ceilings {string.Join(", ", load.Rows.Select(r => (load.Cpus * 1000 / r.CpuMsPerFrame / load.NetworkFps).ToString("0.00")))} | {(ratios.Min() >= 0.85 ? "yes" : "no")} |");
        Console.WriteLine($"| throughput never falls as clients are added | rising or flat | {NeverFalls(load.Rows, out bool rising)} | {(rising ? "yes" : "no")} |");
        var four = load.Service.FirstOrDefault(r => r.Clients == 4);
        double spread = four.P99 / four.P50;
        Console.WriteLine($"| p99 / p50 at 4 clients | ≤ 2.5 | {spread:0.0} | {(spread <= 2.5 ? "yes" : "no")} |");
        double above = (load.PeakBytes - load.IdleBytes) / 1e6;
        Console.WriteLine($"| resident memory above idle, 16 clients, 1024×512 | ≤ 400 MB | {above:0} MB | {(above <= 400 ? "yes" : "no")} |");
        if (load.LoneRun.Count > 0)
        {
            var one = load.LoneRun[0];
            bool helps = one.Lone - one.Default > one.Spread;
            bool hurts = load.LoneRun.Skip(1).Any(r => r.Default - r.Lone > r.Spread);
            Console.WriteLine();
            Console.WriteLine($"Lone-run session (Service:LoneRunThreads), lone / as set at {string.Join(", ", load.LoneRun.Select(r => $"{r.Clients} client(s) {r.Lone / r.Default:0.00}× (±{r.Spread:0.0} frames/s)"))}: " +
                (helps && !hurts ? "helps one client beyond the spread and hurts no other count: worth the default." :
                 helps ? "helps one client beyond the spread but hurts another count: keep it opt-in." :
                 "no gain beyond the spread at one client: keep it opt-in."));
        }
        Console.WriteLine();
        Console.WriteLine($"One `issue-tables --runs {runs}` run took {clock.Elapsed.TotalMinutes:0.0} min on {Environment.ProcessorCount} cores; " +
            $"load average before {loadBefore}, after {LoadAverage()} (1, 5, 15 min). Only ratios within one run compare.");
    }

    /// <summary>
    /// Medians over the interleaved rounds, judged step by step: a fall larger than the larger half-range of the
    /// two counts' rounds is a fall; a smaller one is flat within this run's noise.
    /// </summary>
    private static string NeverFalls(List<LoadBench.ClientRow> rows, out bool met)
    {
        met = true;
        var parts = new List<string> { $"{rows[0].MedianFps:0.0} (±{rows[0].HalfRange:0.0})" };
        var notes = new List<string>();
        for (int i = 1; i < rows.Count; i++)
        {
            double fall = rows[i - 1].MedianFps - rows[i].MedianFps, noise = Math.Max(rows[i - 1].HalfRange, rows[i].HalfRange);
            parts.Add($"{rows[i].MedianFps:0.0} (±{rows[i].HalfRange:0.0})");
            if (fall <= 0) continue;
            if (fall > noise) { met = false; notes.Add($"{rows[i - 1].Clients} → {rows[i].Clients}: falls {fall:0.0}, more than the spread {noise:0.0}"); }
            else notes.Add($"{rows[i - 1].Clients} → {rows[i].Clients}: flat within noise (−{fall:0.0} against a spread of ±{noise:0.0})");
        }
        return $"{string.Join(" → ", parts)} frames/s, medians (± half the range) of the rounds{(notes.Count > 0 ? "; " + string.Join("; ", notes) : "")}";
    }

    private static string LoadAverage()
    {
        try
        {
            var parts = File.ReadAllText("/proc/loadavg").Split(' ');
            return $"{parts[0]}, {parts[1]}, {parts[2]}";
        }
        catch (IOException)
        {
            return "unknown";
        }
    }
}
