namespace Strayspot.Bench;

/// <summary>
/// <c>dotnet run -c Release --project tests/Bench -- [suite] [--runs N]</c>. Prints medians and ratios measured in
/// one run as a Markdown table. Suites: scoring (default), chain, chain-kernels (256- against 512-bit kernels, CPU time), runtime, decode, cadence, form, frame-settings, service, load, evaluation, review, recordings
/// (recording-memory: its memory part alone), drive-by (tracking settings on the demo drive-by), all;
/// issue-tables (chain and load with a goals table, for the README's throughput-and-memory section); replicas (worker processes on
/// PostgreSQL: started on its own, not by all).
/// </summary>
public static class Program
{
    /// <summary><c>--frames-at-once N</c>: Service:MaxConcurrentFrames for the load suite.</summary>
    private static int? FramesAtOnce(string[] args)
    {
        int i = Array.IndexOf(args, "--frames-at-once");
        return i >= 0 && i + 1 < args.Length && int.TryParse(args[i + 1], out int n) && n > 0 ? n : null;
    }

    /// <summary><c>--loops N</c>: how many times recording-memory loops the drive-by.</summary>
    private static int Loops(string[] args)
    {
        int i = Array.IndexOf(args, "--loops");
        return i >= 0 && i + 1 < args.Length && int.TryParse(args[i + 1], out int n) && n > 0 ? n : 60;
    }

    /// <summary><c>--memory-pattern</c>: Service:OnnxMemoryPattern on for the load suite (off by default).</summary>
    private static bool MemoryPattern(string[] args) => args.Contains("--memory-pattern");

    /// <summary><c>--network-runs N</c>: Service:NetworkRunsAtOnce for the load suite.</summary>
    private static int? NetworkRuns(string[] args)
    {
        int i = Array.IndexOf(args, "--network-runs");
        return i >= 0 && i + 1 < args.Length && int.TryParse(args[i + 1], out int n) && n >= 0 ? n : null;
    }

    /// <summary><c>--intra-op N</c>: Service:IntraOpThreads for the load suite (0 or absent: the CPU budget's).</summary>
    private static int? IntraOp(string[] args)
    {
        int i = Array.IndexOf(args, "--intra-op");
        return i >= 0 && i + 1 < args.Length && int.TryParse(args[i + 1], out int n) && n > 0 ? n : null;
    }

    public static int Main(string[] args)
    {
        string suite = args.Length > 0 && !args[0].StartsWith("--") ? args[0] : "scoring";
        int runs = 15;
        int i = Array.IndexOf(args, "--runs");
        if (i >= 0 && i + 1 < args.Length && int.TryParse(args[i + 1], out int r) && r > 0) runs = r;
        Console.WriteLine($"# strayspot bench: {suite}, {runs} runs per case, {Environment.ProcessorCount} cores, {DateTime.UtcNow:yyyy-MM-dd}");
        switch (suite)
        {
            case "scoring": ScoringBench.Run(runs); return 0;
            case "chain": PostHocChainBench.Run(runs); return 0;
            case "chain-kernels": ChainKernelsBench.Run(runs); return 0;
            case "load": LoadBench.Run(runs, FramesAtOnce(args), MemoryPattern(args), NetworkRuns(args), IntraOp(args)); return 0;
            case "issue-tables": IssueTables.Run(runs, FramesAtOnce(args), MemoryPattern(args), NetworkRuns(args), IntraOp(args)); return 0;
            case "runtime": RuntimeBench.Run(runs); return 0;
            case "decode": DecodeBench.Run(runs); return 0;
            case "cadence": CadenceBench.Run(runs); return 0;
            case "form": FormBench.Run(runs); return 0;
            case "frame-settings": FrameSettingsBench.Run(runs); return 0;
            case "service": ServiceBench.Run(runs); return 0;
            case "evaluation": EvaluationBench.Run(runs); return 0;
            case "review": ReviewBench.Run(runs); return 0;
            case "recordings": RecordingBench.Run(runs); return 0;
            case "recording-memory": RecordingBench.RunMemory(Loops(args)); return 0;
            case "drive-by": DriveByBench.Run(); return 0;
            case "replicas": ReplicaBench.Run(Math.Min(runs, 5)); return 0;
            case "all": ScoringBench.Run(runs); PostHocChainBench.Run(runs); RuntimeBench.Run(runs); ServiceBench.Run(runs); LoadBench.Run(runs); EvaluationBench.Run(runs); ReviewBench.Run(runs); RecordingBench.Run(runs); return 0;
            default: Console.Error.WriteLine($"unknown suite '{suite}'; try: scoring, chain, chain-kernels, runtime, decode, cadence, form, frame-settings, service, load, issue-tables, evaluation, review, recordings, recording-memory, drive-by, replicas, all"); return 2;
        }
    }
}
