using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;

namespace Strayspot.Service.Frames;

/// <summary>A frame decoded to 8-bit RGB, upright (EXIF orientation applied). Owns its pixels.</summary>
public sealed class DecodedFrame : IDisposable
{
    internal DecodedFrame(Image<Rgb24> image, string format)
    {
        Image = image;
        Format = format;
    }

    public Image<Rgb24> Image { get; }
    /// <summary>The container the bytes were in, e.g. "PNG", "JPEG", "WEBP".</summary>
    public string Format { get; }
    public int Width => Image.Width;
    public int Height => Image.Height;

    /// <summary>Wraps an image made in memory (tests, generated frames); the frame takes ownership.</summary>
    public static DecodedFrame FromImage(Image<Rgb24> image, string format = "memory") => new(image, format);

    public void Dispose() => Image.Dispose();
}
