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
            $"{string.Join(", ", ratios.Select(r => r.ToString("0.00")))} (network alone {load.NetworkFps:0.0} frames/s) | {(ratios.Min() >= 0.85 ? "yes" : "no")} |");
        bool rising = true;
        for (int i = 1; i < load.Service.Count; i++) rising &= load.Service[i].Fps >= load.Service[i - 1].Fps;
        Console.WriteLine($"| throughput never falls as clients are added | rising or flat | {string.Join(" → ", load.Service.Select(r => r.Fps.ToString("0.0")))} frames/s | {(rising ? "yes" : "no")} |");
        var four = load.Service.FirstOrDefault(r => r.Clients == 4);
        double spread = four.P99 / four.P50;
        Console.WriteLine($"| p99 / p50 at 4 clients | ≤ 2.5 | {spread:0.0} | {(spread <= 2.5 ? "yes" : "no")} |");
        double above = (load.PeakBytes - load.IdleBytes) / 1e6;
        Console.WriteLine($"| resident memory above idle, 16 clients, 1024×512 | ≤ 400 MB | {above:0} MB | {(above <= 400 ? "yes" : "no")} |");
        Console.WriteLine();
        Console.WriteLine($"One `issue-tables --runs {runs}` run took {clock.Elapsed.TotalMinutes:0.0} min on {Environment.ProcessorCount} cores; " +
            $"load average before {loadBefore}, after {LoadAverage()} (1, 5, 15 min). Only ratios within one run compare.");
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
