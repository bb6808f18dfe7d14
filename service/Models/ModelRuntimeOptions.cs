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
}
