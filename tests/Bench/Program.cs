namespace Strayspot.Bench;

/// <summary>
/// <c>dotnet run -c Release --project tests/Bench -- [suite] [--runs N]</c>. Prints medians and ratios measured in
/// one run as a Markdown table. Suites: scoring (default), runtime, service, evaluation, review, all; replicas (worker processes on
/// PostgreSQL: started on its own, not by all).
/// </summary>
public static class Program
{
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
            case "runtime": RuntimeBench.Run(runs); return 0;
            case "service": ServiceBench.Run(runs); return 0;
            case "evaluation": EvaluationBench.Run(runs); return 0;
            case "review": ReviewBench.Run(runs); return 0;
            case "replicas": ReplicaBench.Run(Math.Min(runs, 5)); return 0;
            case "all": ScoringBench.Run(runs); RuntimeBench.Run(runs); ServiceBench.Run(runs); EvaluationBench.Run(runs); ReviewBench.Run(runs); return 0;
            default: Console.Error.WriteLine($"unknown suite '{suite}'; try: scoring, runtime, service, evaluation, review, replicas, all"); return 2;
        }
    }
}
