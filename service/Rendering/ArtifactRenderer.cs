using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.PixelFormats;

namespace Strayspot.Service.Rendering;

/// <summary>The PNG artifacts of a frame report. Each method fills one image from the scoring maps.</summary>
public static class ArtifactRenderer
{
    private static readonly PngEncoder Encoder = new() { CompressionLevel = PngCompressionLevel.BestSpeed };

    /// <summary>Predicted class per pixel in the given class colours.</summary>
    public static Image<Rgb24> ClassMap(ReadOnlySpan<ushort> classIndex, int width, int height, IReadOnlyList<Rgb24> colors)
    {
        var pixels = new Rgb24[width * height];
        var fallback = new Rgb24(0, 0, 0);
        for (int i = 0; i < pixels.Length; i++)
        {
            int c = classIndex[i];
            pixels[i] = c < colors.Count ? colors[c] : fallback;
        }
        return Image.LoadPixelData<Rgb24>(pixels, width, height);
    }

    /// <summary>Mask as 0 (in-distribution) and 255 (anomalous).</summary>
    public static Image<L8> Mask(ReadOnlySpan<byte> mask, int width, int height)
    {
        var pixels = new L8[width * height];
        for (int i = 0; i < pixels.Length; i++) pixels[i] = new L8(mask[i] != 0 ? (byte)255 : (byte)0);
        return Image.LoadPixelData<L8>(pixels, width, height);
    }

    /// <summary>Anomaly score on the heat scale, <paramref name="low"/> → first colour, <paramref name="high"/> → last.</summary>
    public static Image<Rgb24> HeatMap(ReadOnlySpan<float> score, int width, int height, float low, float high)
    {
        var pixels = new Rgb24[width * height];
        var table = ColorScales.HeatTable;
        float scale = high > low ? 255f / (high - low) : 0f;
        for (int i = 0; i < pixels.Length; i++)
            pixels[i] = table[Math.Clamp((int)((score[i] - low) * scale), 0, 255)];
        return Image.LoadPixelData<Rgb24>(pixels, width, height);
    }

    /// <summary>
    /// 16-bit anomaly score: value = offset + stored · scale, with offset and scale reported beside the PNG
    /// so a user can recover scores to 1/65535 of their range.
    /// </summary>
    public static Image<L16> Score16(ReadOnlySpan<float> score, int width, int height, out float offset, out float scale)
    {
        float lo = float.PositiveInfinity, hi = float.NegativeInfinity;
        if (score.Length > 0)
        {
            lo = System.Numerics.Tensors.TensorPrimitives.Min(score);
            hi = System.Numerics.Tensors.TensorPrimitives.Max(score);
        }
        offset = float.IsFinite(lo) ? lo : 0;
        scale = hi > lo ? (hi - lo) / 65535f : 1f;
        var pixels = new L16[width * height];
        float inv = 1f / scale;
        for (int i = 0; i < pixels.Length; i++)
            pixels[i] = new L16((ushort)Math.Clamp((int)MathF.Round((score[i] - offset) * inv), 0, 65535));
        return Image.LoadPixelData<L16>(pixels, width, height);
    }

    /// <summary>The frame, with heat colours blended in where the mask is set and the mask's outline drawn.</summary>
    public static Image<Rgb24> Overlay(Image<Rgb24> frame, ReadOnlySpan<float> score, ReadOnlySpan<byte> mask,
        float low, float high, float opacity = 0.55f)
    {
        int width = frame.Width, height = frame.Height;
        var pixels = new Rgb24[width * height];
        frame.CopyPixelDataTo(pixels);
        var table = ColorScales.HeatTable;
        float scale = high > low ? 255f / (high - low) : 0f;
        var outline = new Rgb24(255, 255, 255);
        for (int y = 0; y < height; y++)
        {
            var row = pixels.AsSpan(y * width, width);
            int o = y * width;
            for (int x = 0; x < width; x++)
            {
                if (mask[o + x] == 0) continue;
                bool edge = x == 0 || y == 0 || x == width - 1 || y == height - 1
                    || mask[o + x - 1] == 0 || mask[o + x + 1] == 0 || mask[o + x - width] == 0 || mask[o + x + width] == 0;
                if (edge) { row[x] = outline; continue; }
                var heat = table[Math.Clamp((int)((score[o + x] - low) * scale), 0, 255)];
                var p = row[x];
                row[x] = new Rgb24(
                    (byte)(p.R + (heat.R - p.R) * opacity),
                    (byte)(p.G + (heat.G - p.G) * opacity),
                    (byte)(p.B + (heat.B - p.B) * opacity));
            }
        }
        return Image.LoadPixelData<Rgb24>(pixels, width, height);
    }

    public static void SavePng(Image image, string path) => image.Save(path, Encoder);

    public static void SavePng(Image image, Stream stream) => image.Save(stream, Encoder);
}
