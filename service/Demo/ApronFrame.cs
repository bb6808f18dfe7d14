namespace Strayspot.Service.Demo;

/// <summary>
/// One synthetic apron frame: <see cref="Rgb"/> is row-major, 3 bytes per pixel (R, G, B);
/// <see cref="Labels"/> is one byte per pixel holding an <see cref="ApronClasses"/> index, or
/// <see cref="ApronClasses.Ignore"/> where debris covers the ground.
/// </summary>
public sealed class ApronFrame
{
    public ApronFrame(int width, int height, byte[] rgb, byte[] labels)
    {
        if (width <= 0 || height <= 0) throw new ArgumentOutOfRangeException(nameof(width), $"Frame size {width}x{height} must be positive.");
        if (rgb.Length != width * height * 3) throw new ArgumentException($"RGB buffer has {rgb.Length} bytes, expected {width * height * 3}.", nameof(rgb));
        if (labels.Length != width * height) throw new ArgumentException($"Label buffer has {labels.Length} bytes, expected {width * height}.", nameof(labels));
        Width = width;
        Height = height;
        Rgb = rgb;
        Labels = labels;
    }

    public int Width { get; }
    public int Height { get; }
    public byte[] Rgb { get; }
    public byte[] Labels { get; }

    public ApronFrame Clone() => new(Width, Height, (byte[])Rgb.Clone(), (byte[])Labels.Clone());
}

/// <summary>
/// A frame with foreign-object debris painted in, and its ground truth: <see cref="AnomalyMask"/> is one byte per pixel,
/// 0 in-distribution, 1 debris, 255 ignore (a 2-pixel ring around each object, where edges blend).
/// </summary>
public sealed record ApronDebrisFrame(ApronFrame Frame, byte[] AnomalyMask, int ObjectCount);
