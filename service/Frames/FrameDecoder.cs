using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Formats;
using SixLabors.ImageSharp.Formats.Bmp;
using SixLabors.ImageSharp.Formats.Jpeg;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.Formats.Tiff;
using SixLabors.ImageSharp.Formats.Webp;
using SixLabors.ImageSharp.Memory;
using SixLabors.ImageSharp.PixelFormats;
using SixLabors.ImageSharp.Processing;
using Strayspot.Service.Models;

namespace Strayspot.Service.Frames;

public sealed record FrameDecoderOptions
{
    /// <summary>Frames with more pixels than this are refused from their header, before decoding.</summary>
    public long MaxPixels { get; init; } = 40_000_000;
    /// <summary>Cap on what one decode may allocate; above it the frame is refused.</summary>
    public int AllocationLimitMegabytes { get; init; } = 1024;
    /// <summary>BMP and TIFF are rarely what a camera sends and widen the decoder surface: off unless asked.</summary>
    public bool AllowBmpAndTiff { get; init; }
}

/// <summary>
/// Turns uploaded or stored image bytes into an upright RGB frame, refusing unknown formats, oversized
/// headers and damaged data with a <see cref="FrameException"/> before they cost memory.
/// Thread-safe: one instance can serve every request.
/// </summary>
public sealed class FrameDecoder
{
    private readonly Configuration _configuration;
    private readonly FrameDecoderOptions _options;

    public FrameDecoder(FrameDecoderOptions? options = null)
    {
        _options = options ?? new FrameDecoderOptions();
        if (_options.MaxPixels < 1 || _options.AllocationLimitMegabytes < 1)
            throw new ArgumentOutOfRangeException(nameof(options), "MaxPixels and AllocationLimitMegabytes must be positive.");
        _configuration = _options.AllowBmpAndTiff
            ? new Configuration(new PngConfigurationModule(), new JpegConfigurationModule(), new WebpConfigurationModule(),
                new BmpConfigurationModule(), new TiffConfigurationModule())
            : new Configuration(new PngConfigurationModule(), new JpegConfigurationModule(), new WebpConfigurationModule());
        _configuration.MemoryAllocator = MemoryAllocator.Create(new MemoryAllocatorOptions
        {
            AllocationLimitMegabytes = _options.AllocationLimitMegabytes,
        });
    }

    public FrameDecoderOptions Options => _options;

    public DecodedFrame DecodeFile(string path)
    {
        using var stream = File.OpenRead(path);
        return Decode(stream, path);
    }

    public DecodedFrame Decode(ReadOnlyMemory<byte> bytes, string source = "frame")
    {
        var segment = System.Runtime.InteropServices.MemoryMarshal.TryGetArray(bytes, out ArraySegment<byte> a) ? a : new ArraySegment<byte>(bytes.ToArray());
        using var stream = new MemoryStream(segment.Array!, segment.Offset, segment.Count, writable: false, publiclyVisible: true);
        return Decode(stream, source);
    }

    public DecodedFrame Decode(Stream stream, string source = "frame")
    {
        if (stream is not MemoryStream memory || !memory.TryGetBuffer(out _))
        {
            // Identify, the JPEG end check and Load all read from the start: hold the bytes once.
            memory = new MemoryStream();
            stream.CopyTo(memory);
            memory.Position = 0;
        }
        stream = memory;
        long start = stream.Position;
        if (stream.Length - start == 0)
            throw new FrameException(FrameErrorCodes.Format, $"{source} is empty (0 bytes).");

        IImageInfo? info;
        IImageFormat? format;
        try
        {
            info = Image.Identify(_configuration, stream, out format);
        }
        catch (Exception e) when (IsDecodeFailure(e))
        {
            throw Map(e, source);
        }
        if (info is null || format is null)
            throw new FrameException(FrameErrorCodes.Format,
                $"{source} is not a {AcceptedFormats} image (its first bytes match no enabled format).");

        long pixels = (long)info.Width * info.Height;
        if (info.Width < 1 || info.Height < 1)
            throw new FrameException(FrameErrorCodes.Corrupt, $"{source} claims a size of {info.Width}×{info.Height}.");
        if (pixels > _options.MaxPixels)
            throw new FrameException(FrameErrorCodes.TooLarge,
                $"{source} is {info.Width}×{info.Height} = {pixels} pixels; the limit is {_options.MaxPixels}.");

        stream.Position = start;
        if (format.Name == "JPEG" && memory.TryGetBuffer(out var all))
            EnsureJpegComplete(all.AsSpan((int)start), source);
        if (format.Name.Equals("WEBP", StringComparison.OrdinalIgnoreCase) && memory.TryGetBuffer(out var webp)
            && !WebpStructure.IsComplete(webp.AsSpan((int)start)))
            throw new FrameException(FrameErrorCodes.Corrupt,
                $"{source} is a truncated or damaged WebP: it holds fewer bytes than its RIFF header or one of its chunks declares.");
        if (format.Name == "PNG" && memory.TryGetBuffer(out var pngBytes))
        {
            Image<Rgb24>? fast;
            bool rowsMissing = false;
            try
            {
                long limit = _options.AllocationLimitMegabytes * 1024L * 1024;
                fast = PngFrameInflater.TryDecode(pngBytes.AsSpan((int)start), _configuration, limit, out rowsMissing);
                if (fast is null && !rowsMissing)
                    fast = PngFastDecoder.TryDecode(pngBytes.AsSpan((int)start), _configuration, limit);
            }
            catch (Exception e) when (IsDecodeFailure(e))
            {
                throw Map(e, source);
            }
            if (fast is not null) return new DecodedFrame(fast, format.Name);
            if (rowsMissing)
                throw new FrameException(FrameErrorCodes.Corrupt,
                    $"{source} is a truncated or damaged PNG: its image data ends before the last row.");
        }
        Image<Rgb24> image;
        try
        {
            // Decoding straight to Rgb24 converts grayscale, alpha (dropped), 16-bit and CMYK inputs.
            image = Image.Load<Rgb24>(_configuration, stream);
        }
        catch (Exception e) when (IsDecodeFailure(e))
        {
            throw Map(e, source);
        }
        try
        {
            image.Mutate(x => x.AutoOrient());
        }
        catch (Exception e) when (IsDecodeFailure(e))
        {
            image.Dispose();
            throw Map(e, source);
        }
        return new DecodedFrame(image, format.Name);
    }

    private static void EnsureJpegComplete(ReadOnlySpan<byte> bytes, string source)
    {
        if (!JpegStructure.ReachesEndOfImage(bytes))
            throw new FrameException(FrameErrorCodes.Corrupt,
                $"{source} is a truncated or damaged JPEG: its data ends before the end-of-image marker.");
    }

    private string AcceptedFormats => _options.AllowBmpAndTiff ? "PNG, JPEG, WebP, BMP or TIFF" : "PNG, JPEG or WebP";

    private static bool IsDecodeFailure(Exception e) =>
        e is ImageFormatException or InvalidMemoryOperationException or EndOfStreamException
            or IndexOutOfRangeException or ArgumentException or NotSupportedException or InvalidOperationException;

    private FrameException Map(Exception e, string source) => Innermost(e) switch
    {
        UnknownImageFormatException => new FrameException(FrameErrorCodes.Format,
            $"{source} is not a {AcceptedFormats} image: {e.Message}", e),
        InvalidMemoryOperationException => new FrameException(FrameErrorCodes.TooLarge,
            $"{source} needs more memory to decode than the {_options.AllocationLimitMegabytes} MB allowed: {e.Message}", e),
        _ => new FrameException(FrameErrorCodes.Corrupt, $"{source} is damaged or truncated: {e.Message}", e),
    };

    // Decoders wrap an allocation refusal in a content error; the cause decides the code.
    private static Exception Innermost(Exception e)
    {
        for (var x = e; x is not null; x = x.InnerException)
            if (x is InvalidMemoryOperationException or UnknownImageFormatException) return x;
        return e;
    }
}
