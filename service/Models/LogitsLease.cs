using System.Buffers;
using Microsoft.ML.OnnxRuntime;
using Strayspot.Scoring.Logits;

namespace Strayspot.Service.Models;

/// <summary>
/// One inference's logits, viewed in place in the runtime's output buffer. Dispose it once the view is no longer
/// read: the view's memory belongs to the runtime and is released then.
/// </summary>
public sealed class LogitsLease : IDisposable
{
    private IDisposableReadOnlyCollection<OrtValue>? _outputs;
    private readonly NativeFloatMemory _memory;

    internal unsafe LogitsLease(IDisposableReadOnlyCollection<OrtValue> outputs, OrtValue output, long[] shape)
    {
        _outputs = outputs;
        var span = output.GetTensorMutableDataAsSpan<float>();
        fixed (float* p = span) // native memory: the address is stable while the OrtValue lives
            _memory = new NativeFloatMemory(p, span.Length);
        View = LogitsView.FromShape(_memory.Memory, shape);
    }

    public LogitsView View { get; }

    /// <summary>The runtime's output buffer is ours while the lease lives, so the log is taken in place.</summary>
    internal void ConvertProbabilitiesToLogs() =>
        Strayspot.Scoring.Reduction.LogProbabilities.ConvertInPlace(_memory.Memory.Span[..(View.Channels * View.PlaneLength)], View.Channels, View.Height, View.Width);

    public void Dispose()
    {
        _outputs?.Dispose();
        _outputs = null;
    }

    private sealed unsafe class NativeFloatMemory(float* pointer, int length) : MemoryManager<float>
    {
        public override Span<float> GetSpan() => new(pointer, length);
        public override MemoryHandle Pin(int elementIndex = 0) => new(pointer + elementIndex);
        public override void Unpin() { }
        protected override void Dispose(bool disposing) { }
    }
}
