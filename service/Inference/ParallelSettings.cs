using Strayspot.Service.Models;

namespace Strayspot.Service.Inference;

/// <summary>
/// How many cores one frame may use, decided once per process: the service sets it from Service:IntraOpThreads,
/// the command line from --threads. Every ONNX Runtime session and every scoring pipeline reads it from here.
/// </summary>
public sealed record ParallelSettings
{
    /// <summary>ONNX Runtime intra-op threads per inference; 0 in configuration means every core.</summary>
    public int IntraOpThreads { get; init; } = Environment.ProcessorCount;
    /// <summary>Upper bound on threads per frame in the scoring core's parallel stages (−1: the runtime decides).</summary>
    public int ScoringThreads { get; init; } = -1;
    /// <summary>Run each new session once with a dummy input before it serves frames.</summary>
    public bool WarmUp { get; init; } = true;
    /// <summary>ONNX Runtime's memory pattern for every session (<see cref="ModelRuntimeOptions.MemoryPattern"/>).</summary>
    public bool MemoryPattern { get; init; }
    /// <summary>Inferences per session at once (<see cref="ModelRuntimeOptions.RunsAtOnce"/>; 0: no limit).</summary>
    public int NetworkRunsAtOnce { get; init; }
    /// <summary>Threads of a network run that starts alone (<see cref="ModelRuntimeOptions.LoneRunThreads"/>; 0: none).</summary>
    public int LoneRunThreads { get; init; }

    public static ParallelSettings Default { get; } = new();

    /// <summary>The most intra-op threads asked for, as Service:IntraOpThreads allows.</summary>
    public const int MaxThreads = 1024;

    /// <summary>A configured thread count where 0 (or null) means every core.</summary>
    public static ParallelSettings FromThreads(int? threads, bool warmUp = true)
    {
        // Refused with a code (the command line's exit 2): ten thousand threads would only stall the start.
        if (threads is < 0 or > MaxThreads)
            throw new Strayspot.Scoring.Logits.ScoringInputException(Strayspot.Scoring.Logits.ScoringErrorCodes.Options,
                $"--threads must be 0 (every core) to {MaxThreads}; got {threads}.");
        return new ParallelSettings
        {
            IntraOpThreads = threads is > 0 ? threads.Value : Environment.ProcessorCount,
            WarmUp = warmUp,
        };
    }

    public ModelRuntimeOptions Runtime() => new() { IntraOpThreads = IntraOpThreads, WarmUp = WarmUp, MemoryPattern = MemoryPattern, RunsAtOnce = NetworkRunsAtOnce, LoneRunThreads = LoneRunThreads };
}
