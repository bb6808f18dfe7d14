using Strayspot.Scoring.Logits;

namespace Strayspot.Service.Frames;

/// <summary>
/// Where the frame's pixels sit inside the model input: the resized frame occupies
/// [0, ContentHeight) × [0, ContentWidth) of the InputHeight × InputWidth tensor; the rest is bottom/right padding.
/// </summary>
public readonly record struct ContentBox(int FrameHeight, int FrameWidth, int ContentHeight, int ContentWidth, int InputHeight, int InputWidth)
{
    public bool HasPadding => ContentHeight != InputHeight || ContentWidth != InputWidth;

    /// <summary>
    /// The content region in a model output of <paramref name="outputHeight"/> × <paramref name="outputWidth"/>:
    /// content × (output size / input size), exact (may be fractional when the content is not a multiple of the stride).
    /// </summary>
    public (double Height, double Width) ContentInOutput(int outputHeight, int outputWidth) =>
        ((double)ContentHeight * outputHeight / InputHeight, (double)ContentWidth * outputWidth / InputWidth);

    /// <summary>
    /// Whole output rows/columns to keep: the exact region rounded to the nearest cell (at least 1), so the
    /// kept region is off by at most half an output cell when the content is not a multiple of the model's stride.
    /// </summary>
    public (int Height, int Width) CropInOutput(int outputHeight, int outputWidth)
    {
        var (h, w) = ContentInOutput(outputHeight, outputWidth);
        return (Math.Clamp((int)Math.Round(h, MidpointRounding.AwayFromZero), 1, outputHeight),
                Math.Clamp((int)Math.Round(w, MidpointRounding.AwayFromZero), 1, outputWidth));
    }

    /// <summary>
    /// Logits restricted to the frame's content (padding cut off). Returns <paramref name="logits"/> itself when
    /// nothing is cut; otherwise copies into <paramref name="scratch"/> (grown if too small) and views that.
    /// The scoring core then resizes the result to FrameHeight × FrameWidth.
    /// </summary>
    public LogitsView CropToContent(LogitsView logits, ref float[]? scratch)
    {
        var (h, w) = CropInOutput(logits.Height, logits.Width);
        if (h == logits.Height && w == logits.Width) return logits;
        int c = logits.Channels, plane = h * w, total = c * plane;
        if (scratch is null || scratch.Length < total) scratch = new float[total];
        var src = logits.Data.Span;
        var dst = scratch.AsSpan(0, total);
        for (int ch = 0; ch < c; ch++)
            for (int y = 0; y < h; y++)
                src.Slice(ch * logits.PlaneLength + y * logits.Width, w).CopyTo(dst.Slice(ch * plane + y * w, w));
        return new LogitsView(scratch.AsMemory(0, total), c, h, w);
    }
}

/// <summary>A normalized input tensor ready for the model, plus where the frame sits in it.</summary>
public sealed class PreparedInput
{
    internal PreparedInput(Memory<float> data, long[] shape, ContentBox box)
    {
        Data = data;
        Shape = shape;
        Box = box;
    }

    /// <summary>Borrowed from the preprocessor that made it: valid until its next <c>Prepare</c>.</summary>
    public Memory<float> Data { get; }
    /// <summary>[1,3,H,W] for nchw or [1,H,W,3] for nhwc.</summary>
    public long[] Shape { get; }
    public ContentBox Box { get; }
}
