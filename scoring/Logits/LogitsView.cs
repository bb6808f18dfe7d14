namespace Strayspot.Scoring.Logits;

/// <summary>
/// A read-only view of one frame's logits laid out channel-major, <c>[C,h,w]</c>.
/// It borrows its memory (an ONNX Runtime output, an NPY file, a pooled buffer): the owner keeps
/// it alive while the view is used. Memory rather than span so rows can be processed in parallel.
/// </summary>
public readonly struct LogitsView
{
    public LogitsView(ReadOnlyMemory<float> data, int channels, int height, int width)
    {
        if (channels < 1 || height < 1 || width < 1)
            throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                $"Logits need at least one channel, row and column; got C={channels}, h={height}, w={width}.");
        long expected = (long)channels * height * width;
        if (data.Length != expected)
            throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                $"Logits [C={channels}, h={height}, w={width}] need {expected} values; the buffer holds {data.Length}.");
        Data = data;
        Channels = channels;
        Height = height;
        Width = width;
    }

    public ReadOnlyMemory<float> Data { get; }
    public int Channels { get; }
    public int Height { get; }
    public int Width { get; }
    public int PlaneLength => Height * Width;

    public ReadOnlySpan<float> Plane(int channel) => Data.Span.Slice(channel * PlaneLength, PlaneLength);

    public ReadOnlySpan<float> Row(int channel, int y) => Data.Span.Slice(channel * PlaneLength + y * Width, Width);

    /// <summary>Accepts a shape of rank 3 <c>[C,h,w]</c> or rank 4 <c>[1,C,h,w]</c>.</summary>
    public static LogitsView FromShape(ReadOnlyMemory<float> data, ReadOnlySpan<long> shape)
    {
        if (shape.Length == 4)
        {
            if (shape[0] != 1)
                throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                    $"Logits of rank 4 must have a batch of 1; got shape [{string.Join(", ", shape.ToArray())}].");
            shape = shape[1..];
        }
        if (shape.Length != 3)
            throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                $"Logits must have shape [C,h,w] or [1,C,h,w]; got rank {shape.Length} [{string.Join(", ", shape.ToArray())}].");
        foreach (long d in shape)
            if (d < 1 || d > int.MaxValue)
                throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                    $"Logits dimensions must be positive; got [{string.Join(", ", shape.ToArray())}].");
        return new LogitsView(data, (int)shape[0], (int)shape[1], (int)shape[2]);
    }
}
