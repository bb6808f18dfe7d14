using System.Buffers;
using System.Buffers.Binary;
using System.IO.Compression;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Advanced;
using SixLabors.ImageSharp.PixelFormats;

namespace Strayspot.Service.Frames;

/// <summary>
/// The common camera PNG (8-bit RGB, RGBA or grey, not interlaced) decoded in managed code, in front of libpng:
/// .NET's zlib inflates a 1024×512 frame in about a millisecond, and libpng spends most of its time after that
/// (unfiltering, its RGBA swizzle, copies). The rows are unfiltered in place and written straight into the Rgb24
/// image, giving ImageSharp's pixels (alpha dropped, grey spread to R, G and B). Anything else — palette,
/// grey+alpha, 16-bit or sub-8-bit samples, interlacing, tRNS, eXIf, a bad CRC, too little or too much data, an
/// unknown filter — returns null and goes on to the libpng and ImageSharp paths, which report damage in their words.
/// </summary>
internal static class PngFrameInflater
{
    private static ReadOnlySpan<byte> Signature => [0x89, (byte)'P', (byte)'N', (byte)'G', 0x0D, 0x0A, 0x1A, 0x0A];

    /// <param name="limitBytes">The decoder's allocation cap, applied as <see cref="PngFastDecoder"/> applies it.</param>
    public static Image<Rgb24>? TryDecode(ReadOnlySpan<byte> png, Configuration configuration, long limitBytes = long.MaxValue) =>
        TryDecode(png, configuration, limitBytes, out _);

    /// <param name="rowsMissing">Every chunk whole and its CRC right, but the image data's zlib stream ends before the
    /// last row: the file was cut inside its data and re-closed. ImageSharp would fill the missing rows and hand out
    /// a picture the file never held, so the caller refuses the frame instead.</param>
    public static Image<Rgb24>? TryDecode(ReadOnlySpan<byte> png, Configuration configuration, long limitBytes, out bool rowsMissing)
    {
        rowsMissing = false;
        if (png.Length < 8 + 25 || !png.StartsWith(Signature)) return null;
        int at = 8, width = 0, height = 0, bpp = 0, idatBytes = 0, idatRuns = 0;
        bool inIdat = false, ended = false;
        while (at + 12 <= png.Length)
        {
            uint length = BinaryPrimitives.ReadUInt32BigEndian(png.Slice(at));
            if (length > int.MaxValue || at + 12L + length > png.Length) return null;
            var type = png.Slice(at + 4, 4);
            var data = png.Slice(at + 8, (int)length);
            if (BinaryPrimitives.ReadUInt32BigEndian(png.Slice(at + 8 + (int)length)) != System.IO.Hashing.Crc32.HashToUInt32(png.Slice(at + 4, 4 + (int)length)))
                return null;
            if (at == 8)
            {
                if (!type.SequenceEqual("IHDR"u8) || length != 13) return null;
                uint w = BinaryPrimitives.ReadUInt32BigEndian(data), h = BinaryPrimitives.ReadUInt32BigEndian(data.Slice(4));
                // depth 8; colour type 0, 2 or 6; compression, filter method and interlace all 0.
                if (w < 1 || h < 1 || w > int.MaxValue || h > int.MaxValue || data[8] != 8 || data[10] != 0 || data[11] != 0 || data[12] != 0) return null;
                bpp = data[9] switch { 0 => 1, 2 => 3, 6 => 4, _ => 0 };
                if (bpp == 0) return null;
                (width, height) = ((int)w, (int)h);
            }
            else if (type.SequenceEqual("IDAT"u8))
            {
                if (!inIdat && idatRuns++ > 0) return null; // IDAT chunks must follow one another
                inIdat = true;
                idatBytes = checked(idatBytes + (int)length);
            }
            else
            {
                inIdat = false;
                if (type.SequenceEqual("IEND"u8)) { ended = true; break; }
                // tRNS would make a colour transparent, PLTE has no place here, eXIf may turn the frame: leave them to the others.
                if (type.SequenceEqual("tRNS"u8) || type.SequenceEqual("eXIf"u8) || type.SequenceEqual("PLTE"u8)) return null;
                if ((type[0] & 0x20) == 0) return null; // an unknown critical chunk
            }
            at += 12 + (int)length;
        }
        if (!ended || idatRuns != 1 || idatBytes < 2) return null;
        if (4L * width * height > Math.Min(limitBytes, Array.MaxLength)) return null;
        long stride = 1 + (long)width * bpp;
        if (stride * height > Array.MaxLength - 64) return null;
        int total = (int)(stride * height);

        byte[] compressed = ArrayPool<byte>.Shared.Rent(idatBytes);
        // Slack after the rows: a three-byte pixel is read as four bytes.
        byte[] rows = ArrayPool<byte>.Shared.Rent(total + 16);
        byte[] zeros = ArrayPool<byte>.Shared.Rent((int)stride + 16);
        Image<Rgb24>? image = null;
        try
        {
            int filled = 0;
            for (at = 8; ;)
            {
                int length = (int)BinaryPrimitives.ReadUInt32BigEndian(png.Slice(at));
                var type = png.Slice(at + 4, 4);
                if (type.SequenceEqual("IEND"u8)) break;
                if (type.SequenceEqual("IDAT"u8)) { png.Slice(at + 8, length).CopyTo(compressed.AsSpan(filled)); filled += length; }
                at += 12 + length;
            }
            var inflated = Inflate(compressed, idatBytes, rows.AsSpan(0, total));
            if (inflated != Inflation.Whole)
            {
                rowsMissing = inflated == Inflation.Short;
                return null;
            }

            zeros.AsSpan().Clear();
            int rowBytes = (int)stride - 1;
            for (int y = 0; y < height;)
            {
                int start = (int)(y * stride);
                var prior = y == 0 ? zeros.AsSpan(0, rowBytes + 16) : rows.AsSpan(start - rowBytes, rowBytes + 16);
                if (bpp > 1 && rows[start] is 3 or 4)
                {
                    int run = 1;
                    while (run < 4 && y + run < height && rows[start + run * (int)stride] is 3 or 4) run++;
                    PixelFilterRows(rows.AsSpan(start + 1), prior, (int)stride, run, rowBytes, bpp);
                    y += run;
                    continue;
                }
                if (!Unfilter(rows[start], rows.AsSpan(start + 1, rowBytes + 15), prior, rowBytes, bpp)) return null;
                y++;
            }

            image = new Image<Rgb24>(configuration, width, height);
            for (int y = 0; y < height; y++)
            {
                var row = rows.AsSpan((int)(y * stride) + 1, rowBytes);
                var target = MemoryMarshal.AsBytes(image.DangerousGetPixelRowMemory(y).Span);
                if (bpp == 3) row.CopyTo(target);
                else if (bpp == 4) PngFastDecoder.DropAlpha(row, target);
                else SpreadGrey(row, target);
            }
            var done = image;
            image = null;
            return done;
        }
        finally
        {
            image?.Dispose();
            ArrayPool<byte>.Shared.Return(compressed);
            ArrayPool<byte>.Shared.Return(rows);
            ArrayPool<byte>.Shared.Return(zeros);
        }
    }

    private enum Inflation { Whole, Short, Damaged }

    /// <summary>Exactly <paramref name="rows"/>.Length bytes from one zlib stream that ends where the IDAT data ends.</summary>
    private static Inflation Inflate(byte[] compressed, int length, Span<byte> rows)
    {
        var source = new TailByByte(compressed, length);
        try
        {
            using var z = new ZLibStream(source, CompressionMode.Decompress, leaveOpen: true);
            if (z.ReadAtLeast(rows, rows.Length, throwOnEndOfStream: false) != rows.Length) return Inflation.Short;
            Span<byte> beyond = stackalloc byte[1];
            if (z.Read(beyond) != 0) return Inflation.Damaged;
        }
        catch (InvalidDataException)
        {
            return Inflation.Damaged;
        }
        return source.Position == length ? Inflation.Whole : Inflation.Damaged;
    }

    /// <summary>
    /// Hands the inflater its last bytes one at a time: it stops asking once the zlib stream (and its Adler-32) is
    /// complete, so bytes left unread mean data after the stream, which ZLibStream would otherwise swallow unseen.
    /// </summary>
    private sealed class TailByByte(byte[] buffer, int length) : MemoryStream(buffer, 0, length, writable: false)
    {
        private int Allowed(int count)
        {
            long left = Length - Position;
            return left <= 16 ? Math.Min(count, 1) : (int)Math.Min(count, left - 16);
        }

        public override int Read(byte[] array, int offset, int count) => base.Read(array, offset, Allowed(count));
        public override int Read(Span<byte> destination) => base.Read(destination.Slice(0, Allowed(destination.Length)));
    }

    /// <summary>
    /// One row's filter undone in place. <paramref name="row"/> and <paramref name="prior"/> reach 15 bytes past the
    /// row's <paramref name="rowBytes"/> so that a three-byte pixel can be loaded as four; only its three are stored.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static bool Unfilter(byte filter, Span<byte> row, ReadOnlySpan<byte> prior, int rowBytes, int bpp)
    {
        ref byte x = ref MemoryMarshal.GetReference(row);
        ref byte b = ref MemoryMarshal.GetReference(prior);
        switch (filter)
        {
            case 0:
                return true;
            case 2:
            {
                int i = 0;
                for (; i + 16 <= rowBytes; i += 16)
                    (Vector128.LoadUnsafe(ref x, (nuint)i) + Vector128.LoadUnsafe(ref b, (nuint)i)).StoreUnsafe(ref x, (nuint)i);
                for (; i < rowBytes; i++) Unsafe.Add(ref x, i) += Unsafe.Add(ref b, i);
                return true;
            }
            case 1 when bpp > 1:
            {
                // Sub's chain is one add a pixel: a row alone keeps up with the four-row vector here.
                var keep = bpp == 4 ? Vector128.Create(0xFFFFFFFFu, 0, 0, 0).AsByte() : Vector128.Create(0x00FFFFFFu, 0, 0, 0).AsByte();
                var a = Vector128<byte>.Zero;
                for (int i = 0; i < rowBytes; i += bpp)
                {
                    a = Vector128.CreateScalar(Read4(ref x, i)).AsByte() + (a & keep);
                    StorePixel(ref x, i, a.AsUInt32().ToScalar(), bpp);
                }
                return true;
            }
            case 1 or 3 or 4:
                UnfilterScalar(filter, row.Slice(0, rowBytes), prior.Slice(0, rowBytes), bpp);
                return true;
            default:
                return false;
        }
    }

    /// <summary>
    /// Up to four rows filtered by Average or Paeth (any mix) at once, each one pixel behind the row above it (whose
    /// pixels it needs are then done), one row to a quarter of a 16-lane vector. Each pixel waits on its left
    /// neighbour, so one row alone leaves the core idle between dependent steps; four independent rows fill it.
    /// Lanes of a row not started or already finished see zeros and are not stored; the fourth byte of a three-byte
    /// pixel is zeroed on load, so its lane stays zero, and is not stored.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static void PixelFilterRows(Span<byte> rows, ReadOnlySpan<byte> prior, int stride, int count, int rowBytes, int bpp)
    {
        // Per row, which predictor its lanes take.
        Span<long> mean = stackalloc long[4], paeth = stackalloc long[4];
        for (int j = 0; j < count; j++)
        {
            byte filter = Unsafe.Add(ref MemoryMarshal.GetReference(rows), j * stride - 1);
            mean[j] = filter == 3 ? -1 : 0;
            paeth[j] = filter == 4 ? -1 : 0;
        }
        var isMean = Vector256.Create(mean[0], mean[1], mean[2], mean[3]).AsInt16();
        var isPaeth = Vector256.Create(paeth[0], paeth[1], paeth[2], paeth[3]).AsInt16();
        ref byte x = ref MemoryMarshal.GetReference(rows);
        ref byte p = ref MemoryMarshal.GetReference(prior);
        uint pixel = bpp == 4 ? 0xFFFFFFFFu : 0x00FFFFFFu;
        var keep = Vector128.Create(pixel).AsByte();
        var low = Vector256.Create((short)0xFF);
        var a = Vector256<short>.Zero;
        var c = Vector256<short>.Zero;
        int n = rowBytes / bpp;
        Span<uint> raw = stackalloc uint[4];
        var firstRow = Vector256.Create(-1L, 0, 0, 0).AsInt16();
        for (int k = 0; k < n + count - 1; k++)
        {
            Vector128<byte> rawBytes;
            uint up0;
            if (count == 4 && k >= 3 && k < n)
            {
                // All four rows inside their pixels: the common case, without per-row checks.
                int at = k * bpp;
                rawBytes = Vector128.Create(Read4(ref x, at), Read4(ref x, stride + at - bpp),
                    Read4(ref x, 2 * stride + at - 2 * bpp), Read4(ref x, 3 * stride + at - 3 * bpp)).AsByte();
                up0 = Read4(ref p, at);
            }
            else
            {
                for (int j = 0; j < 4; j++)
                    raw[j] = j < count && k - j >= 0 && k - j < n ? Read4(ref x, j * stride + (k - j) * bpp) : 0;
                rawBytes = Vector128.Create(raw[0], raw[1], raw[2], raw[3]).AsByte();
                up0 = k < n ? Read4(ref p, k * bpp) : 0;
            }
            // Up for the first row from the row above; for the others, the row above's pixel just computed, still in
            // the lanes before theirs (read back from memory it would wait for its store).
            var b = Vector256.ConditionalSelect(firstRow,
                Vector256.WidenLower((Vector128.CreateScalar(up0).AsByte() & keep).ToVector256Unsafe()).AsInt16(),
                Vector256.Shuffle(a.AsInt64(), Vector256.Create(0L, 0, 1, 2)).AsInt16());
            var r = Vector256.WidenLower((rawBytes & keep).ToVector256Unsafe()).AsInt16();
            var bc = b - c;
            var pa = Vector256.Abs(bc);        // |p - a| = |b - c|
            var d = a - c;
            var pb = Vector256.Abs(d);         // |p - b| = |a - c|
            var pc = Vector256.Abs(d + bc);    // |p - c| = |a + b - 2c|
            var smallest = Vector256.Min(pa, Vector256.Min(pb, pc));
            // The specification's order on ties: a, then b, then c.
            var nearest = Vector256.ConditionalSelect(Vector256.Equals(smallest, pa), a, Vector256.ConditionalSelect(Vector256.Equals(smallest, pb), b, c));
            var predicted = (isPaeth & nearest) | (isMean & ((a + b) >>> 1));
            a = (r + predicted) & low;
            c = b;
            var words = Vector128.Narrow(a.GetLower().AsUInt16(), a.GetUpper().AsUInt16()).AsUInt32();
            if (count == 4 && k >= 3 && k < n)
            {
                int at = k * bpp;
                StorePixel(ref x, at, words.GetElement(0), bpp);
                StorePixel(ref x, stride + at - bpp, words.GetElement(1), bpp);
                StorePixel(ref x, 2 * stride + at - 2 * bpp, words.GetElement(2), bpp);
                StorePixel(ref x, 3 * stride + at - 3 * bpp, words.GetElement(3), bpp);
            }
            else
                for (int j = 0; j < count; j++)
                    if (k - j >= 0 && k - j < n)
                        StorePixel(ref x, j * stride + (k - j) * bpp, words.GetElement(j), bpp);
        }
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static uint Read4(ref byte at, int i) => Unsafe.ReadUnaligned<uint>(ref Unsafe.Add(ref at, i));

    /// <summary>
    /// A pixel's own bytes only: a four-byte store of a three-byte pixel would overlap the next pixel's load, which
    /// then waits for the store to reach the cache instead of taking the value from the store queue.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void StorePixel(ref byte at, int i, uint value, int bpp)
    {
        if (bpp == 4)
        {
            Unsafe.WriteUnaligned(ref Unsafe.Add(ref at, i), value);
            return;
        }
        Unsafe.WriteUnaligned(ref Unsafe.Add(ref at, i), (ushort)value);
        Unsafe.Add(ref at, i + 2) = (byte)(value >> 16);
    }

    /// <summary>Sub, Average and Paeth a byte at a time, for grey rows (one byte a pixel leaves nothing to vectorize).</summary>
    private static void UnfilterScalar(byte filter, Span<byte> row, ReadOnlySpan<byte> prior, int bpp)
    {
        for (int i = 0; i < row.Length; i++)
        {
            int a = i >= bpp ? row[i - bpp] : 0, b = prior[i], c = i >= bpp ? prior[i - bpp] : 0;
            int add = filter switch
            {
                1 => a,
                3 => (a + b) >> 1,
                _ => Paeth(a, b, c),
            };
            row[i] = (byte)(row[i] + add);
        }
    }

    private static int Paeth(int a, int b, int c)
    {
        int p = a + b - c, pa = Math.Abs(p - a), pb = Math.Abs(p - b), pc = Math.Abs(p - c);
        return pa <= pb && pa <= pc ? a : pb <= pc ? b : c;
    }

    private static void SpreadGrey(ReadOnlySpan<byte> grey, Span<byte> rgb)
    {
        for (int i = 0, o = 0; i < grey.Length; i++, o += 3)
        {
            byte g = grey[i];
            rgb[o] = g;
            rgb[o + 1] = g;
            rgb[o + 2] = g;
        }
    }
}
