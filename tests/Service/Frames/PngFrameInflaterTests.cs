using System.Buffers.Binary;
using System.IO.Compression;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Advanced;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Frames;

namespace Strayspot.Tests.Service.Frames;

/// <summary>
/// The managed PNG path must give exactly the pixels of ImageSharp 2.1's own decode to Rgb24 (the reference, from
/// NuGet) for files ImageSharp's PngEncoder writes with every filter method, and step aside (null) on damage so the
/// libpng and ImageSharp paths answer as they did before.
/// </summary>
public class PngFrameInflaterTests
{
    public static TheoryData<PngColorType, PngFilterMethod> Kinds()
    {
        var data = new TheoryData<PngColorType, PngFilterMethod>();
        foreach (var colour in new[] { PngColorType.Rgb, PngColorType.RgbWithAlpha, PngColorType.Grayscale })
            foreach (var filter in Enum.GetValues<PngFilterMethod>())
                data.Add(colour, filter);
        return data;
    }

    private static readonly PngCompressionLevel[] Levels =
        [PngCompressionLevel.NoCompression, PngCompressionLevel.BestSpeed, PngCompressionLevel.DefaultCompression, PngCompressionLevel.BestCompression];

    [Theory]
    [MemberData(nameof(Kinds))]
    public void PixelsMatchImageSharpsDecodeBitForBit(PngColorType colour, PngFilterMethod filter)
    {
        int case_ = 0;
        foreach (int width in new[] { 1, 2, 3, 5, 17, 1023 })
            foreach (int height in width == 1023 ? new[] { 1, 4 } : new[] { 1, 2, 3, 9 })
                foreach (var content in new[] { Content.Random, Content.Smooth, Content.FewLevels })
                {
                    case_++;
                    byte[] png = Encode(width, height, content, colour, filter, Levels[case_ % Levels.Length], seed: case_);
                    string what = $"{width}×{height} {content} {colour} {filter} {Levels[case_ % Levels.Length]}";
                    // ImageSharp 2.1's own decode to Rgb24 is the reference.
                    using var reference = Image.Load<Rgb24>(png);
                    AssertSamePixels(reference, png, what);
                    // The same pixel data in many small IDAT chunks.
                    AssertSamePixels(reference, Rebuild(png, Idat(png), chunkSize: 1 + case_ % 97), what + ", split IDAT");
                }
    }

    [Fact]
    public void TakesTheDemoFramesKind()
    {
        byte[] png = Strayspot.Service.Demo.DemoPng.Encode(new Strayspot.Service.Demo.ApronSceneGenerator(256, 128).Render(70));
        using var reference = Image.Load<Rgb24>(png);
        AssertSamePixels(reference, png, "demo frame");
    }

    [Fact]
    public void FlippedByteInIdatFailsTheCrcAndStepsAside()
    {
        byte[] png = Encode(40, 20, Content.Random, PngColorType.Rgb, PngFilterMethod.Paeth, PngCompressionLevel.DefaultCompression, 3);
        int idat = IndexOfChunk(png, "IDAT");
        png[idat + 8 + 10] ^= 0x10;
        Assert.Null(PngFrameInflater.TryDecode(png, Configuration.Default));
        FrameDecoderAnswersAsBefore(png, expectError: true);
    }

    [Fact]
    public void TruncatedZlibDataInACompleteFileIsRefusedAsCorrupt()
    {
        byte[] png = Encode(40, 20, Content.Random, PngColorType.Rgb, PngFilterMethod.Sub, PngCompressionLevel.DefaultCompression, 4);
        byte[] z = Idat(png);
        byte[] shorter = Rebuild(png, z.AsSpan(0, z.Length / 2).ToArray(), 1 << 20);
        Assert.Null(PngFrameInflater.TryDecode(shorter, Configuration.Default));
        // ImageSharp alone fills the missing rows and answers a picture the file never held: refused instead.
        using (var filled = Image.Load<Rgb24>(shorter)) Assert.Equal(20, filled.Height);
        Assert.Null(PngFrameInflater.TryDecode(shorter, Configuration.Default, long.MaxValue, out bool rowsMissing));
        Assert.True(rowsMissing);
        var e = Assert.Throws<FrameException>(() => new FrameDecoder().Decode(shorter));
        Assert.Equal(FrameErrorCodes.Corrupt, e.Code);
        Assert.Contains("ends before the last row", e.Message);
        // And a file cut short inside IDAT, with no IEND.
        Assert.Null(PngFrameInflater.TryDecode(png.AsSpan(0, png.Length - 40), Configuration.Default));
        FrameDecoderAnswersAsBefore(png.AsSpan(0, png.Length - 40).ToArray(), expectError: true);
    }

    [Theory]
    [InlineData(1)]
    [InlineData(3)]
    [InlineData(40)]
    public void DataAfterTheZlibStreamStepsAside(int extra)
    {
        byte[] png = Encode(40, 20, Content.Smooth, PngColorType.RgbWithAlpha, PngFilterMethod.Adaptive, PngCompressionLevel.DefaultCompression, 5);
        byte[] z = [.. Idat(png), .. Enumerable.Repeat((byte)0xA5, extra)];
        byte[] longer = Rebuild(png, z, 1 << 20);
        Assert.Null(PngFrameInflater.TryDecode(longer, Configuration.Default));
        FrameDecoderAnswersAsBefore(longer, expectError: false);
    }

    [Fact]
    public void MoreRowsThanTheHeaderSaysStepsAside()
    {
        byte[] png = Encode(40, 20, Content.Smooth, PngColorType.Rgb, PngFilterMethod.Up, PngCompressionLevel.DefaultCompression, 6);
        int ihdr = IndexOfChunk(png, "IHDR");
        var header = png.AsSpan(ihdr + 8, 13).ToArray();
        BinaryPrimitives.WriteInt32BigEndian(header.AsSpan(4), 19);
        byte[] fewer = Replace(png, "IHDR", header);
        Assert.Null(PngFrameInflater.TryDecode(fewer, Configuration.Default));
        FrameDecoderAnswersAsBefore(fewer, expectError: false);
    }

    [Fact]
    public void UnknownFilterByteStepsAside()
    {
        byte[] png = Encode(40, 20, Content.Random, PngColorType.Rgb, PngFilterMethod.Average, PngCompressionLevel.DefaultCompression, 7);
        byte[] rows = Inflate(Idat(png));
        rows[5 * (1 + 40 * 3)] = 5;
        byte[] bad = Rebuild(png, Deflate(rows), 1 << 20);
        Assert.Null(PngFrameInflater.TryDecode(bad, Configuration.Default));
        FrameDecoderAnswersAsBefore(bad, expectError: true);
        // The rebuild itself is sound: with the filter byte put back, the path takes the file.
        rows[5 * (1 + 40 * 3)] = 3;
        Assert.NotNull(PngFrameInflater.TryDecode(Rebuild(png, Deflate(rows), 1 << 20), Configuration.Default));
    }

    [Theory]
    [InlineData(PngColorType.Palette, PngBitDepth.Bit8, false)]
    [InlineData(PngColorType.GrayscaleWithAlpha, PngBitDepth.Bit8, false)]
    [InlineData(PngColorType.Rgb, PngBitDepth.Bit16, false)]
    [InlineData(PngColorType.Grayscale, PngBitDepth.Bit4, false)]
    [InlineData(PngColorType.Rgb, PngBitDepth.Bit8, true)]
    public void OtherKindsAreLeftToTheOtherPaths(PngColorType colour, PngBitDepth depth, bool interlaced)
    {
        using var image = Picture(30, 10, Content.Random, 8);
        using var stream = new MemoryStream();
        image.SaveAsPng(stream, new PngEncoder { ColorType = colour, BitDepth = depth, InterlaceMethod = interlaced ? PngInterlaceMode.Adam7 : PngInterlaceMode.None });
        Assert.Null(PngFrameInflater.TryDecode(stream.ToArray(), Configuration.Default));
    }

    [Fact]
    public void ATransparentColourChunkIsLeftToTheOtherPaths()
    {
        byte[] png = Encode(20, 10, Content.Random, PngColorType.Rgb, PngFilterMethod.None, PngCompressionLevel.DefaultCompression, 9);
        Assert.NotNull(PngFrameInflater.TryDecode(png, Configuration.Default));
        int iend = IndexOfChunk(png, "IEND");
        using var withTrns = new MemoryStream();
        withTrns.Write(png.AsSpan(0, iend));
        FrameDecoderTests.WriteChunk(withTrns, "tRNS", [0, 1, 0, 2, 0, 3]);
        withTrns.Write(png.AsSpan(iend));
        Assert.Null(PngFrameInflater.TryDecode(withTrns.ToArray(), Configuration.Default));
    }

    [Fact]
    public void AFrameAboveTheAllocationCapIsLeftToTheOtherPaths()
    {
        byte[] png = Encode(64, 64, Content.Smooth, PngColorType.Rgb, PngFilterMethod.None, PngCompressionLevel.DefaultCompression, 10);
        Assert.Null(PngFrameInflater.TryDecode(png, Configuration.Default, limitBytes: 4 * 64 * 64 - 1));
        Assert.NotNull(PngFrameInflater.TryDecode(png, Configuration.Default, limitBytes: 4 * 64 * 64));
    }

    private enum Content { Random, Smooth, FewLevels }

    private static void AssertSamePixels(Image<Rgb24> reference, byte[] png, string what)
    {
        using var fast = PngFrameInflater.TryDecode(png, Configuration.Default);
        Assert.True(fast is not null, $"{what}: the managed path declined");
        Assert.Equal((reference.Width, reference.Height), (fast.Width, fast.Height));
        for (int y = 0; y < reference.Height; y++)
            Assert.True(reference.DangerousGetPixelRowMemory(y).Span.SequenceEqual(fast.DangerousGetPixelRowMemory(y).Span), $"{what}: row {y} differs");
    }

    /// <summary>What FrameDecoder answered before the managed path: libpng's pixels, else ImageSharp's pixels or error.</summary>
    private static void FrameDecoderAnswersAsBefore(byte[] png, bool expectError)
    {
        using var libpng = PngFastDecoder.TryDecode(png, Configuration.Default);
        Image<Rgb24>? sharp = null;
        if (libpng is null)
            try { sharp = Image.Load<Rgb24>(png); } catch (Exception) { }
        using (sharp)
        {
            var before = libpng ?? sharp;
            Assert.Equal(expectError, before is null);
            if (before is null)
            {
                var e = Assert.Throws<FrameException>(() => new FrameDecoder().Decode(png));
                Assert.Equal(FrameErrorCodes.Corrupt, e.Code);
                return;
            }
            using var now = new FrameDecoder().Decode(png);
            Assert.Equal((before.Width, before.Height), (now.Width, now.Height));
            for (int y = 0; y < before.Height; y++)
                Assert.True(before.DangerousGetPixelRowMemory(y).Span.SequenceEqual(now.Image.DangerousGetPixelRowMemory(y).Span), $"row {y} differs");
        }
    }

    private static Image<Rgba32> Picture(int width, int height, Content content, int seed)
    {
        var image = new Image<Rgba32>(width, height);
        var random = new Random(seed);
        for (int y = 0; y < height; y++)
            for (int x = 0; x < width; x++)
                image[x, y] = content switch
                {
                    Content.Random => new Rgba32((byte)random.Next(256), (byte)random.Next(256), (byte)random.Next(256), (byte)random.Next(256)),
                    Content.Smooth => new Rgba32((byte)(x * 3 + y), (byte)(x + y * 5), (byte)(128 + x - y), (byte)(255 - x)),
                    // Few distinct values: Paeth's three distances tie often.
                    _ => new Rgba32((byte)(random.Next(3) * 100), (byte)(random.Next(2) * 200), (byte)(random.Next(3) * 7), (byte)(random.Next(2) * 255)),
                };
        return image;
    }

    private static byte[] Encode(int width, int height, Content content, PngColorType colour, PngFilterMethod filter, PngCompressionLevel level, int seed)
    {
        using var image = Picture(width, height, content, seed);
        using var stream = new MemoryStream();
        image.SaveAsPng(stream, new PngEncoder { ColorType = colour, BitDepth = PngBitDepth.Bit8, FilterMethod = filter, CompressionLevel = level });
        return stream.ToArray();
    }

    private static int IndexOfChunk(byte[] png, string type)
    {
        for (int at = 8; at + 8 <= png.Length; at += 12 + BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(at)))
            if (png.AsSpan(at + 4, 4).SequenceEqual(System.Text.Encoding.ASCII.GetBytes(type))) return at;
        throw new InvalidOperationException($"no {type} chunk");
    }

    /// <summary>All IDAT data of a file, joined.</summary>
    private static byte[] Idat(byte[] png)
    {
        var joined = new MemoryStream();
        for (int at = 8; at + 8 <= png.Length; at += 12 + BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(at)))
            if (png.AsSpan(at + 4, 4).SequenceEqual("IDAT"u8))
                joined.Write(png.AsSpan(at + 8, BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(at))));
        return joined.ToArray();
    }

    /// <summary>The file with its IDAT data replaced by <paramref name="data"/> in chunks of at most <paramref name="chunkSize"/> bytes.</summary>
    private static byte[] Rebuild(byte[] png, byte[] data, int chunkSize)
    {
        var output = new MemoryStream();
        output.Write(png.AsSpan(0, 8));
        bool written = false;
        for (int at = 8; at + 8 <= png.Length;)
        {
            int length = BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(at));
            if (!png.AsSpan(at + 4, 4).SequenceEqual("IDAT"u8)) output.Write(png.AsSpan(at, 12 + length));
            else if (!written)
            {
                for (int i = 0; i < data.Length; i += chunkSize)
                    FrameDecoderTests.WriteChunk(output, "IDAT", data.AsSpan(i, Math.Min(chunkSize, data.Length - i)).ToArray());
                written = true;
            }
            at += 12 + length;
        }
        return output.ToArray();
    }

    private static byte[] Replace(byte[] png, string type, byte[] data)
    {
        int at = IndexOfChunk(png, type);
        var output = new MemoryStream();
        output.Write(png.AsSpan(0, at));
        FrameDecoderTests.WriteChunk(output, type, data);
        output.Write(png.AsSpan(at + 12 + BinaryPrimitives.ReadInt32BigEndian(png.AsSpan(at))));
        return output.ToArray();
    }

    private static byte[] Inflate(byte[] z)
    {
        using var inflater = new ZLibStream(new MemoryStream(z), CompressionMode.Decompress);
        var output = new MemoryStream();
        inflater.CopyTo(output);
        return output.ToArray();
    }

    private static byte[] Deflate(byte[] raw)
    {
        var output = new MemoryStream();
        using (var deflater = new ZLibStream(output, CompressionLevel.Optimal, leaveOpen: true)) deflater.Write(raw);
        return output.ToArray();
    }
}
