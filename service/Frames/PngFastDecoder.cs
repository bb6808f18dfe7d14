using System.Buffers.Binary;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Advanced;
using SixLabors.ImageSharp.PixelFormats;
using SkiaSharp;

namespace Strayspot.Service.Frames;

/// <summary>
/// PNG frames through the libpng inside SkiaSharp (already shipped for plotting): a 1024×512 frame decodes in a
/// fraction of ImageSharp's time. PNG is lossless and no colour-space conversion is asked for, so the pixels are
/// the file's own and match ImageSharp's bit for bit (checked by tests for 8-bit RGB, RGBA, grey, grey+alpha and
/// palette). Returns null, leaving the frame to ImageSharp, where the two could differ or an error needs
/// ImageSharp's wording: 16-bit samples (rounded differently to 8 bits), an eXIf chunk (orientation), anything
/// libpng does not decode completely.
/// </summary>
internal static class PngFastDecoder
{
    private static ReadOnlySpan<byte> Signature => [0x89, (byte)'P', (byte)'N', (byte)'G', 0x0D, 0x0A, 0x1A, 0x0A];

    /// <param name="limitBytes">The decoder's allocation cap: a frame whose RGBA scratch exceeds it goes to ImageSharp, which refuses it.</param>
    public static Image<Rgb24>? TryDecode(ReadOnlySpan<byte> png, Configuration configuration, long limitBytes = long.MaxValue)
    {
        if (!Suitable(png)) return null;
        // Pinned: SKData wraps the caller's bytes without a copy for the codec's lifetime.
        unsafe
        {
            fixed (byte* p = png)
            {
                using var data = SKData.Create((IntPtr)p, png.Length);
                using var codec = SKCodec.Create(data);
                if (codec is null) return null;
                int width = codec.Info.Width, height = codec.Info.Height;
                if (width < 1 || height < 1 || 4L * width * height > Math.Min(limitBytes, Array.MaxLength)) return null;
                // No colour space on the target: the codec hands out the stored samples, untouched.
                var info = new SKImageInfo(width, height, SKColorType.Rgba8888, SKAlphaType.Unpremul, null);
                var rgba = System.Buffers.ArrayPool<byte>.Shared.Rent(checked(width * height * 4));
                Image<Rgb24>? image = null;
                try
                {
                    SKCodecResult result;
                    fixed (byte* dst = rgba) result = codec.GetPixels(info, (IntPtr)dst, width * 4, new SKCodecOptions(SKZeroInitialized.No));
                    if (result != SKCodecResult.Success) return null;
                    image = new Image<Rgb24>(configuration, width, height);
                    var source = rgba.AsSpan(0, width * height * 4);
                    for (int y = 0; y < height; y++)
                        DropAlpha(source.Slice(y * width * 4, width * 4), MemoryMarshal.AsBytes(image.DangerousGetPixelRowMemory(y).Span));
                    var done = image;
                    image = null;
                    return done;
                }
                finally
                {
                    image?.Dispose();
                    System.Buffers.ArrayPool<byte>.Shared.Return(rgba);
                }
            }
        }
    }

    // Four RGBA pixels to four RGB pixels in the low 12 bytes (index 0x80: zero).
    private static readonly Vector128<byte> RgbOfRgba = Vector128.Create((byte)0, 1, 2, 4, 5, 6, 8, 9, 10, 12, 13, 14, 0x80, 0x80, 0x80, 0x80);

    /// <summary>One row of RGBA into RGB: alpha is dropped, as ImageSharp's decode to Rgb24 does.</summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    internal static void DropAlpha(ReadOnlySpan<byte> rgba, Span<byte> rgb)
    {
        int x = 0, o = 0;
        if (Vector128.IsHardwareAccelerated)
        {
            ref byte from = ref MemoryMarshal.GetReference(rgba);
            ref byte to = ref MemoryMarshal.GetReference(rgb);
            // Each store writes 16 bytes of which the next pass overwrites the last 4: stop while 16 still fit.
            for (; o + 16 <= rgb.Length && x + 16 <= rgba.Length; x += 16, o += 12)
                Vector128.ShuffleNative(Vector128.LoadUnsafe(ref from, (nuint)x), RgbOfRgba).StoreUnsafe(ref to, (nuint)o);
        }
        for (; x + 4 <= rgba.Length; x += 4, o += 3)
        {
            rgb[o] = rgba[x];
            rgb[o + 1] = rgba[x + 1];
            rgb[o + 2] = rgba[x + 2];
        }
    }

    /// <summary>A PNG with 8-bit (or fewer) samples and no eXIf chunk, judged from its chunk list alone.</summary>
    private static bool Suitable(ReadOnlySpan<byte> png)
    {
        if (png.Length < 33 || !png.StartsWith(Signature)) return false;
        int at = 8;
        while (at + 8 <= png.Length)
        {
            uint length = BinaryPrimitives.ReadUInt32BigEndian(png.Slice(at));
            var type = png.Slice(at + 4, 4);
            if (type.SequenceEqual("IHDR"u8))
            {
                if (length < 13 || at + 8 + 13 > png.Length) return false;
                if (png[at + 8 + 8] > 8) return false; // bit depth: 16-bit rounds differently
            }
            else if (type.SequenceEqual("eXIf"u8)) return false;
            else if (type.SequenceEqual("IEND"u8)) return true;
            long next = (long)at + 12 + length;
            if (next > png.Length) return false;
            at = (int)next;
        }
        return false;
    }
}
