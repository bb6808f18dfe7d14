using Microsoft.ML.OnnxRuntime;

namespace Strayspot.Service.Models;

/// <summary>How a model's ONNX Runtime session runs on the CPU.</summary>
public sealed record ModelRuntimeOptions
{
    /// <summary>Threads one inference may use. Set from configuration: the runtime's own default ignores container CPU limits.</summary>
    public int IntraOpThreads { get; init; } = Environment.ProcessorCount;
    public GraphOptimizationLevel OptimizationLevel { get; init; } = GraphOptimizationLevel.ORT_ENABLE_ALL;
    /// <summary>Spinning idle threads burn CPU on a shared box; off by default.</summary>
    public bool AllowSpinning { get; init; }
    /// <summary>Run once at load with a dummy input (also checks the output shape early).</summary>
    public bool WarmUp { get; init; } = true;
    /// <summary>
    /// ONNX Runtime's memory pattern: buffers planned per input shape and kept in the arena. Off by default: on the
    /// demo model at 1024×512 it held 330–410 MB per session at about the same speed (README, Benchmarks).
    /// </summary>
    public bool MemoryPattern { get; init; }
    /// <summary>
    /// Inferences this session runs at once (0: no limit). With more frames in flight than this, the others decode,
    /// preprocess and score while the network runs, and the arena grows for this many runs only.
    /// </summary>
    public int RunsAtOnce { get; init; }
    /// <summary>
    /// Intra-op threads for an inference that starts while no other runs on this model (0: no such session). Above
    /// <see cref="IntraOpThreads"/>, the model keeps a second session of the same weights with this many threads, so a
    /// lone frame's network uses the cores that several frames in flight would otherwise share; it costs that
    /// session's arena.
    /// </summary>
    public int LoneRunThreads { get; init; }
}
