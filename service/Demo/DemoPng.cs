using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.PixelFormats;

namespace Strayspot.Service.Demo;

/// <summary>PNG files of demo frames, label maps and masks.</summary>
public static class DemoPng
{
    private static readonly PngEncoder Encoder = new() { CompressionLevel = PngCompressionLevel.Level6 };

    public static void SaveRgb(string path, ReadOnlySpan<byte> rgb, int width, int height)
    {
        using var image = Image.LoadPixelData<Rgb24>(rgb, width, height);
        image.SaveAsPng(path, Encoder);
    }

    /// <summary>An apron frame as PNG bytes, e.g. to post to the service.</summary>
    public static byte[] Encode(ApronFrame frame)
    {
        using var image = Image.LoadPixelData<Rgb24>(frame.Rgb, frame.Width, frame.Height);
        var stream = new MemoryStream();
        image.SaveAsPng(stream, Encoder);
        return stream.ToArray();
    }

    public static void SaveGray(string path, ReadOnlySpan<byte> values, int width, int height)
    {
        using var image = Image.LoadPixelData<L8>(values, width, height);
        image.SaveAsPng(path, Encoder);
    }

    /// <summary>Label map drawn in the class display colours (255 = ignore, black).</summary>
    public static void SaveLabels(string path, ReadOnlySpan<byte> labels, int width, int height)
    {
        var rgb = new byte[labels.Length * 3];
        for (int i = 0; i < labels.Length; i++)
        {
            if (labels[i] >= ApronClasses.Count) continue;
            var hex = ApronClasses.Colors[labels[i]];
            rgb[3 * i] = Convert.ToByte(hex.Substring(1, 2), 16);
            rgb[3 * i + 1] = Convert.ToByte(hex.Substring(3, 2), 16);
            rgb[3 * i + 2] = Convert.ToByte(hex.Substring(5, 2), 16);
        }
        SaveRgb(path, rgb, width, height);
    }

    public static (byte[] Rgb, int Width, int Height) LoadRgb(string path)
    {
        using var image = Image.Load<Rgb24>(path);
        var bytes = new byte[image.Width * image.Height * 3];
        image.CopyPixelDataTo(bytes);
        return (bytes, image.Width, image.Height);
    }

    public static (byte[] Values, int Width, int Height) LoadGray(string path)
    {
        using var image = Image.Load<L8>(path);
        var bytes = new byte[image.Width * image.Height];
        image.CopyPixelDataTo(bytes);
        return (bytes, image.Width, image.Height);
    }
}
