using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Advanced;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Models;

namespace Strayspot.Service.Calibration;

/// <summary>
/// Ground-truth label maps: grayscale PNGs (8- or 16-bit) whose pixel value is the class index.
/// Palette PNGs are refused: their indices cannot be read back exactly through a colour conversion.
/// </summary>
public static class LabelMapReader
{
    private static readonly Configuration PngOnly = new(new PngConfigurationModule());

    public static ushort[] Read(string path, int expectedWidth, int expectedHeight)
    {
        try
        {
            using var stream = File.OpenRead(path);
            var info = Image.Identify(PngOnly, stream, out var format)
                ?? throw new Strayspot.Service.Frames.FrameException(Strayspot.Service.Frames.FrameErrorCodes.Format, $"Label map '{path}' is not a PNG.");
            var png = info.Metadata.GetPngMetadata();
            if (png.ColorType != PngColorType.Grayscale)
                throw new Strayspot.Service.Frames.FrameException(Strayspot.Service.Frames.FrameErrorCodes.Format,
                    $"Label map '{path}' is a {png.ColorType} PNG; save labels as 8- or 16-bit grayscale (value = class index).");
            if (info.Width != expectedWidth || info.Height != expectedHeight)
                throw new Strayspot.Service.Frames.FrameException(Strayspot.Service.Frames.FrameErrorCodes.Format,
                    $"Label map '{path}' is {info.Width}×{info.Height}; its frame is {expectedWidth}×{expectedHeight}.");
            stream.Position = 0;
            var labels = new ushort[expectedWidth * expectedHeight];
            if (png.BitDepth == PngBitDepth.Bit16)
            {
                using var img = Image.Load<L16>(PngOnly, stream);
                for (int y = 0; y < img.Height; y++)
                {
                    var row = img.DangerousGetPixelRowMemory(y).Span;
                    for (int x = 0; x < row.Length; x++) labels[y * expectedWidth + x] = row[x].PackedValue;
                }
            }
            else
            {
                using var img = Image.Load<L8>(PngOnly, stream);
                int max = (1 << (int)(png.BitDepth ?? PngBitDepth.Bit8)) - 1;
                for (int y = 0; y < img.Height; y++)
                {
                    var row = img.DangerousGetPixelRowMemory(y).Span;
                    // Low bit depths are widened to 0..255 by the decoder; map them back to their index.
                    for (int x = 0; x < row.Length; x++)
                        labels[y * expectedWidth + x] = max == 255 ? row[x].PackedValue : (ushort)Math.Round(row[x].PackedValue * max / 255.0);
                }
            }
            return labels;
        }
        catch (ImageFormatException e)
        {
            throw new Strayspot.Service.Frames.FrameException(Strayspot.Service.Frames.FrameErrorCodes.Corrupt, $"Label map '{path}' is damaged: {e.Message}", e);
        }
    }
}
