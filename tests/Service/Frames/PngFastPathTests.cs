using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Advanced;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Frames;

namespace Strayspot.Tests.Service.Frames;

/// <summary>
/// PNG frames decoded through SkiaSharp's libpng must carry exactly the pixels ImageSharp 2.1 (the reference, from
/// NuGet) decodes to Rgb24, for every colour type and bit depth; 16-bit and EXIF-oriented PNGs stay with ImageSharp.
/// </summary>
public class PngFastPathTests
{
    public static TheoryData<PngColorType, PngBitDepth, bool> Kinds() => new()
    {
        { PngColorType.Rgb, PngBitDepth.Bit8, false },
        { PngColorType.Rgb, PngBitDepth.Bit8, true },
        { PngColorType.RgbWithAlpha, PngBitDepth.Bit8, false },
        { PngColorType.Grayscale, PngBitDepth.Bit8, false },
        { PngColorType.Grayscale, PngBitDepth.Bit1, false },
        { PngColorType.Grayscale, PngBitDepth.Bit4, false },
        { PngColorType.GrayscaleWithAlpha, PngBitDepth.Bit8, false },
        { PngColorType.Palette, PngBitDepth.Bit8, false },
        { PngColorType.Palette, PngBitDepth.Bit4, false },
        { PngColorType.Rgb, PngBitDepth.Bit16, false },
        { PngColorType.RgbWithAlpha, PngBitDepth.Bit16, false },
        { PngColorType.Grayscale, PngBitDepth.Bit16, false },
    };

    [Theory]
    [MemberData(nameof(Kinds))]
    public void PixelsMatchImageSharpBitForBit(PngColorType colour, PngBitDepth depth, bool interlaced)
    {
        // Noise with partly transparent pixels and a gamma chunk: a colour-space or alpha conversion would show.
        using var source = new Image<Rgba64>(67, 41);
        var random = new Random(5);
        for (int y = 0; y < source.Height; y++)
            for (int x = 0; x < source.Width; x++)
                source[x, y] = new Rgba64((ushort)random.Next(65536), (ushort)random.Next(65536), (ushort)random.Next(65536), (ushort)random.Next(65536));
        source.Metadata.GetPngMetadata().Gamma = 0.3f;
        using var stream = new MemoryStream();
        source.SaveAsPng(stream, new PngEncoder
        {
            ColorType = colour,
            BitDepth = depth,
            InterlaceMethod = interlaced ? PngInterlaceMode.Adam7 : PngInterlaceMode.None,
        });
        byte[] png = stream.ToArray();

        using var reference = Image.Load<Rgb24>(png);
        using var frame = new FrameDecoder().Decode(png);
        Assert.Equal((reference.Width, reference.Height), (frame.Width, frame.Height));
        for (int y = 0; y < reference.Height; y++)
            Assert.True(reference.DangerousGetPixelRowMemory(y).Span.SequenceEqual(frame.Image.DangerousGetPixelRowMemory(y).Span), $"row {y} differs");

        // The fast path must really have taken the 8-bit files (and declined the 16-bit ones), or this compares ImageSharp with itself.
        using var fast = PngFastDecoder.TryDecode(png, Configuration.Default);
        Assert.Equal(depth != PngBitDepth.Bit16, fast is not null);
        if (fast is not null)
            for (int y = 0; y < reference.Height; y++)
                Assert.True(reference.DangerousGetPixelRowMemory(y).Span.SequenceEqual(fast.DangerousGetPixelRowMemory(y).Span), $"fast row {y} differs");
    }

    [Fact]
    public void DamagedPngStillGetsImageSharpsError()
    {
        using var img = new Image<Rgb24>(64, 64);
        using var stream = new MemoryStream();
        img.SaveAsPng(stream);
        byte[] png = stream.ToArray();
        Assert.Null(PngFastDecoder.TryDecode(png.AsSpan(0, png.Length / 2), Configuration.Default));
        var e = Assert.Throws<FrameException>(() => new FrameDecoder().Decode(png.AsMemory(0, png.Length / 2)));
        Assert.Equal(FrameErrorCodes.Corrupt, e.Code);
    }
}
