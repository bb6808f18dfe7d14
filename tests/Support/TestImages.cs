using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Formats.Jpeg;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.PixelFormats;

namespace Strayspot.Tests.Support;

/// <summary>Small images made in code for frame tests.</summary>
public static class TestImages
{
    /// <summary>A smooth, asymmetric pattern so resizing, flips and rotations are all visible.</summary>
    public static Image<Rgb24> Gradient(int width, int height, int seed = 0)
    {
        var image = new Image<Rgb24>(width, height);
        for (int y = 0; y < height; y++)
            for (int x = 0; x < width; x++)
                image[x, y] = new Rgb24((byte)((x * 255 / Math.Max(1, width - 1) + seed) & 255),
                    (byte)((y * 255 / Math.Max(1, height - 1) + 3 * seed) & 255), (byte)((x * y + 7 * seed) % 251));
        return image;
    }

    /// <summary>Random pixels from a seeded generator.</summary>
    public static Image<Rgb24> Noise(int width, int height, int seed)
    {
        var rng = new Random(seed);
        var image = new Image<Rgb24>(width, height);
        for (int y = 0; y < height; y++)
            for (int x = 0; x < width; x++)
                image[x, y] = new Rgb24((byte)rng.Next(256), (byte)rng.Next(256), (byte)rng.Next(256));
        return image;
    }

    public static byte[] Png<T>(Image<T> image) where T : unmanaged, IPixel<T>
    {
        using var ms = new MemoryStream();
        image.Save(ms, new PngEncoder());
        return ms.ToArray();
    }

    public static byte[] Jpeg<T>(Image<T> image, int quality = 95) where T : unmanaged, IPixel<T>
    {
        using var ms = new MemoryStream();
        image.Save(ms, new JpegEncoder { Quality = quality });
        return ms.ToArray();
    }
}
