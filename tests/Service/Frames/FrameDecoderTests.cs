using System.Buffers.Binary;
using System.Text;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Formats.Bmp;
using SixLabors.ImageSharp.Formats.Jpeg;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.Metadata.Profiles.Exif;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Frames;

public class FrameDecoderTests
{
    private readonly FrameDecoder _decoder = new();

    [Fact]
    public void OneByOnePixelFrameDecodes()
    {
        using var img = new Image<Rgb24>(1, 1);
        img[0, 0] = new Rgb24(10, 200, 30);
        using var frame = _decoder.Decode(TestImages.Png(img));
        Assert.Equal((1, 1), (frame.Width, frame.Height));
        Assert.Equal(new Rgb24(10, 200, 30), frame.Image[0, 0]);
        Assert.Equal("PNG", frame.Format);
    }

    [Fact]
    public void NonImageBytesAreRefusedAsUnknownFormat()
    {
        var e = Assert.Throws<FrameException>(() => _decoder.Decode(Encoding.UTF8.GetBytes("{\"this is\": \"json, not a picture\"}")));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.Format, e.Code);
        Assert.Contains("PNG, JPEG or WebP", e.Message);
    }

    [Fact]
    public void EmptyInputIsRefused()
    {
        var e = Assert.Throws<FrameException>(() => _decoder.Decode(Array.Empty<byte>()));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.Format, e.Code);
    }

    [Fact]
    public void TruncatedJpegIsRefusedAsCorrupt()
    {
        using var img = TestImages.Noise(64, 48, seed: 1);
        byte[] jpeg = TestImages.Jpeg(img);
        var e = Assert.Throws<FrameException>(() => _decoder.Decode(jpeg.AsMemory(0, jpeg.Length / 3)));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.Corrupt, e.Code);
    }

    [Fact]
    public void JpegCutInsideItsHeaderIsRefused()
    {
        using var img = TestImages.Noise(64, 48, seed: 2);
        byte[] jpeg = TestImages.Jpeg(img);
        var e = Assert.Throws<FrameException>(() => _decoder.Decode(jpeg.AsMemory(0, 40)));
        Assert.True(e.Code is Strayspot.Service.Frames.FrameErrorCodes.Corrupt or Strayspot.Service.Frames.FrameErrorCodes.Format, e.Code);
    }

    [Fact]
    public void TruncatedPngIsRefusedAsCorrupt()
    {
        using var img = TestImages.Noise(64, 48, seed: 6);
        byte[] png = TestImages.Png(img);
        var e = Assert.Throws<FrameException>(() => _decoder.Decode(png.AsMemory(0, png.Length / 2)));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.Corrupt, e.Code);
    }

    [Theory]
    [InlineData(false)]
    [InlineData(true)]
    public void TruncatedWebpIsRefusedAsCorrupt(bool lossless)
    {
        using var img = TestImages.Noise(64, 48, seed: 13);
        using var ms = new MemoryStream();
        img.Save(ms, new SixLabors.ImageSharp.Formats.Webp.WebpEncoder
        {
            FileFormat = lossless ? SixLabors.ImageSharp.Formats.Webp.WebpFileFormatType.Lossless : SixLabors.ImageSharp.Formats.Webp.WebpFileFormatType.Lossy,
        });
        byte[] webp = ms.ToArray();
        using (var whole = _decoder.Decode(webp)) Assert.Equal(64, whole.Width);
        var e = Assert.Throws<FrameException>(() => _decoder.Decode(webp.AsMemory(0, webp.Length / 2)));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.Corrupt, e.Code);
        Assert.Contains("WebP", e.Message);
    }

    [Fact]
    public void LosslessWebpDecodesExactly()
    {
        using var img = TestImages.Noise(9, 7, seed: 12);
        using var ms = new MemoryStream();
        img.Save(ms, new SixLabors.ImageSharp.Formats.Webp.WebpEncoder { FileFormat = SixLabors.ImageSharp.Formats.Webp.WebpFileFormatType.Lossless });
        using var frame = _decoder.Decode(ms.ToArray());
        Assert.Equal("Webp", frame.Format, ignoreCase: true);
        for (int y = 0; y < 7; y++)
            for (int x = 0; x < 9; x++)
                Assert.Equal(img[x, y], frame.Image[x, y]);
    }

    [Fact]
    public void PngHeaderClaiming30000x30000IsRefusedBeforeDecoding()
    {
        byte[] png = CraftPngHeader(30000, 30000);
        // Decoding would need 2.7 GB; a 1 MB allocation cap proves the refusal came from the header alone.
        var tight = new FrameDecoder(new FrameDecoderOptions { AllocationLimitMegabytes = 1 });
        var e = Assert.Throws<FrameException>(() => tight.Decode(png));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.TooLarge, e.Code);
        Assert.Contains("30000×30000", e.Message);
        Assert.Contains("40000000", e.Message);
    }

    [Fact]
    public void FrameOverTheAllocationCapIsRefusedAsTooLarge()
    {
        using var img = TestImages.Noise(1200, 1000, seed: 3);
        var tight = new FrameDecoder(new FrameDecoderOptions { AllocationLimitMegabytes = 1 });
        var e = Assert.Throws<FrameException>(() => tight.Decode(TestImages.Png(img)));
        Assert.True(e.Code == Strayspot.Service.Frames.FrameErrorCodes.TooLarge, e.Message + " | " + e.InnerException);
    }

    [Fact]
    public void GrayscaleAlphaAndSixteenBitPngsBecomeRgb()
    {
        using var gray = new Image<L8>(2, 1);
        gray[0, 0] = new L8(17); gray[1, 0] = new L8(240);
        using (var f = _decoder.Decode(TestImages.Png(gray)))
            Assert.Equal(new Rgb24(240, 240, 240), f.Image[1, 0]);

        using var rgba = new Image<Rgba32>(1, 1);
        rgba[0, 0] = new Rgba32(9, 99, 199, 0); // fully transparent: colour kept, alpha dropped
        using (var f = _decoder.Decode(TestImages.Png(rgba)))
            Assert.Equal(new Rgb24(9, 99, 199), f.Image[0, 0]);

        using var deep = new Image<Rgb48>(1, 1);
        deep[0, 0] = new Rgb48(65535, 0, 32896); // 32896 = 128 × 257
        using (var f = _decoder.Decode(TestImages.Png(deep)))
            Assert.Equal(new Rgb24(255, 0, 128), f.Image[0, 0]);
    }

    [Fact]
    public void BmpIsRefusedByDefaultAndAcceptedWhenEnabled()
    {
        using var img = TestImages.Gradient(5, 4);
        using var ms = new MemoryStream();
        img.Save(ms, new BmpEncoder());
        var e = Assert.Throws<FrameException>(() => _decoder.Decode(ms.ToArray()));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.Format, e.Code);
        using var frame = new FrameDecoder(new FrameDecoderOptions { AllowBmpAndTiff = true }).Decode(ms.ToArray());
        Assert.Equal(img[3, 2], frame.Image[3, 2]);
    }

    [Fact]
    public void NonSeekableStreamIsBufferedOnce()
    {
        using var img = TestImages.Gradient(7, 5);
        using var stream = new OneWayStream(TestImages.Png(img));
        using var frame = _decoder.Decode(stream);
        Assert.Equal(img[6, 4], frame.Image[6, 4]);
    }

    // Outside reference: the EXIF specification's Orientation tag (0x0112) table, which names for each value the
    // visual side where the stored 0th row and the stored 0th column end up.
    public static TheoryData<ushort, string, string> OrientationTable => new()
    {
        { 1, "top", "left" }, { 2, "top", "right" }, { 3, "bottom", "right" }, { 4, "bottom", "left" },
        { 5, "left", "top" }, { 6, "right", "top" }, { 7, "right", "bottom" }, { 8, "left", "bottom" },
    };

    [Theory]
    [MemberData(nameof(OrientationTable))]
    public void ExifOrientationIsAppliedPerTheExifTable(ushort orientation, string row0, string col0)
    {
        const int w = 4, h = 3;
        using var stored = new Image<Rgb24>(w, h);
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
                stored[x, y] = new Rgb24((byte)(x * 60 + 10), (byte)(y * 80 + 10), (byte)(x + 10 * y));
        stored.Metadata.ExifProfile = new ExifProfile();
        stored.Metadata.ExifProfile.SetValue(ExifTag.Orientation, orientation);

        using var frame = _decoder.Decode(TestImages.Png(stored));

        bool swapped = row0 is "left" or "right";
        Assert.Equal(swapped ? (h, w) : (w, h), (frame.Width, frame.Height));
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                // Stored row y lies along the side named by row0; stored column x along the side named by col0.
                int vx, vy;
                if (!swapped)
                {
                    vy = row0 == "top" ? y : h - 1 - y;
                    vx = col0 == "left" ? x : w - 1 - x;
                }
                else
                {
                    vx = row0 == "left" ? y : h - 1 - y;
                    vy = col0 == "top" ? x : w - 1 - x;
                }
                Assert.Equal(stored[x, y], frame.Image[vx, vy]);
            }
    }

    [Fact]
    public void JpegExifOrientationSixTurnsTheFrameClockwise()
    {
        // Left half red, right half blue, 32×16 stored; orientation 6 shows it turned 90° clockwise:
        // 16 wide, 32 tall, red on top (EXIF table: stored 0th column is the visual top).
        using var stored = new Image<Rgb24>(32, 16);
        for (int y = 0; y < 16; y++)
            for (int x = 0; x < 32; x++)
                stored[x, y] = x < 16 ? new Rgb24(220, 20, 20) : new Rgb24(20, 20, 220);
        stored.Metadata.ExifProfile = new ExifProfile();
        stored.Metadata.ExifProfile.SetValue(ExifTag.Orientation, (ushort)6);
        using var frame = _decoder.Decode(TestImages.Jpeg(stored, 100));
        Assert.Equal((16, 32), (frame.Width, frame.Height));
        Assert.True(frame.Image[8, 4].R > 180 && frame.Image[8, 4].B < 80);
        Assert.True(frame.Image[8, 28].B > 180 && frame.Image[8, 28].R < 80);
    }

    internal static byte[] CraftPngHeader(int width, int height)
    {
        var ms = new MemoryStream();
        ms.Write([0x89, (byte)'P', (byte)'N', (byte)'G', 0x0D, 0x0A, 0x1A, 0x0A]);
        var ihdr = new byte[13];
        BinaryPrimitives.WriteInt32BigEndian(ihdr, width);
        BinaryPrimitives.WriteInt32BigEndian(ihdr.AsSpan(4), height);
        ihdr[8] = 8; ihdr[9] = 2; // 8-bit RGB, deflate, no filter set, not interlaced
        WriteChunk(ms, "IHDR", ihdr);
        WriteChunk(ms, "IDAT", [0x78, 0x9C, 0x03, 0x00, 0x00, 0x00, 0x00, 0x01]);
        WriteChunk(ms, "IEND", []);
        return ms.ToArray();
    }

    internal static void WriteChunk(Stream s, string type, byte[] data)
    {
        Span<byte> four = stackalloc byte[4];
        BinaryPrimitives.WriteInt32BigEndian(four, data.Length);
        s.Write(four);
        var typed = Encoding.ASCII.GetBytes(type).Concat(data).ToArray();
        s.Write(typed);
        BinaryPrimitives.WriteUInt32BigEndian(four, Crc32(typed));
        s.Write(four);
    }

    // The PNG specification's CRC-32 (polynomial 0xEDB88320, reflected).
    private static uint Crc32(byte[] data)
    {
        uint crc = 0xFFFFFFFF;
        foreach (byte b in data)
        {
            crc ^= b;
            for (int k = 0; k < 8; k++) crc = (crc & 1) != 0 ? 0xEDB88320 ^ (crc >> 1) : crc >> 1;
        }
        return ~crc;
    }

    private sealed class OneWayStream(byte[] data) : Stream
    {
        private readonly MemoryStream _inner = new(data);
        public override bool CanRead => true;
        public override bool CanSeek => false;
        public override bool CanWrite => false;
        public override long Length => throw new NotSupportedException();
        public override long Position { get => throw new NotSupportedException(); set => throw new NotSupportedException(); }
        public override int Read(byte[] buffer, int offset, int count) => _inner.Read(buffer, offset, count);
        public override void Flush() { }
        public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();
        public override void SetLength(long value) => throw new NotSupportedException();
        public override void Write(byte[] buffer, int offset, int count) => throw new NotSupportedException();
    }
}

public class CmykJpegTests
{
    [Theory]
    [InlineData(255, 0, 255, 255, 255, 0, 255)]
    [InlineData(0, 255, 255, 255, 0, 255, 255)]
    [InlineData(255, 255, 255, 0, 0, 0, 0)]
    public void AdobeCmykJpegIsDecodedToRgb(byte c, byte m, byte y, byte k, byte r, byte g, byte b)
    {
        // Stored (inverted) C=255, M=0, Y=255, K=255 is magenta ink only: RGB (255, 0, 255) under the common
        // Adobe inverted-CMYK reading R = C·K/255 (recalled from memory; what widely used decoders do).
        byte[] jpeg = CmykJpeg.Flat8x8([c, m, y, k]);
        using var frame = new FrameDecoder().Decode(jpeg);
        Assert.Equal((8, 8), (frame.Width, frame.Height));
        var p = frame.Image[4, 4];
        Assert.True(Math.Abs(p.R - r) <= 5 && Math.Abs(p.G - g) <= 5 && Math.Abs(p.B - b) <= 5, $"got {p}");
    }
}
