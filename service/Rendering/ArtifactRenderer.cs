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

    /// <summary>Anomaly score in heat colours on <paramref name="scale"/>; the same size as the frame, without a legend.</summary>
    public static Image<Rgb24> HeatMap(ReadOnlySpan<float> score, int width, int height, HeatScale scale)
    {
        var pixels = new Rgb24[width * height];
        var table = ColorScales.HeatTable;
        for (int i = 0; i < pixels.Length; i++) pixels[i] = table[scale.IndexOf(score[i])];
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

    public static void SavePng(Image image, string path) => image.Save(path, Encoder);

    public static void SavePng(Image image, Stream stream) => image.Save(stream, Encoder);
}
