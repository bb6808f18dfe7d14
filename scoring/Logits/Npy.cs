using System.Buffers.Binary;
using System.Globalization;
using System.Runtime.InteropServices;
using System.Text;

namespace Strayspot.Scoring.Logits;

/// <summary>An n-dimensional array read from an NPY file, row-major (C order).</summary>
public sealed record NpyArray<T>(T[] Data, int[] Shape);

/// <summary>
/// Reads and writes the NPY array format (versions 1.0, 2.0 and 3.0) for the element types we exchange:
/// little-endian float32 logits (float64 is accepted and narrowed) and uint8 masks.
/// Only C-order arrays: a Fortran-order file is refused rather than silently transposed.
/// </summary>
public static partial class Npy
{
    private static ReadOnlySpan<byte> Magic => [0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y'];

    // The header is a Python dict literal of a few short entries; anything longer is not an NPY header we wrote or expect.
    private const int MaxHeaderLength = 1 << 20;
    private const int Alignment = 64;

    public static NpyArray<float> ReadFloat32(string path)
    {
        using var stream = OpenForRead(path);
        return ReadFloat32(stream);
    }

    public static NpyArray<float> ReadFloat32(Stream s)
    {
        var header = ReadHeader(s);
        long count = ElementCount(header.Shape);
        float[] data;
        switch (header.Descr)
        {
            case "<f4":
                data = ReadElements<float>(s, count, sizeof(float));
                break;
            case "<f8":
                double[] wide = ReadElements<double>(s, count, sizeof(double));
                data = new float[wide.Length];
                for (int i = 0; i < wide.Length; i++) data[i] = (float)wide[i];
                break;
            default:
                throw Format($"dtype '{header.Descr}' is not supported; float32 logits need '<f4' (or '<f8').");
        }
        return new NpyArray<float>(data, header.Shape);
    }

    public static NpyArray<byte> ReadUInt8(string path)
    {
        using var stream = OpenForRead(path);
        return ReadUInt8(stream);
    }

    public static NpyArray<byte> ReadUInt8(Stream s)
    {
        var header = ReadHeader(s);
        if (header.Descr is not ("|u1" or "<u1" or "|b1"))
            throw Format($"dtype '{header.Descr}' is not supported; a mask needs '|u1' (or '|b1').");
        return new NpyArray<byte>(ReadElements<byte>(s, ElementCount(header.Shape), 1), header.Shape);
    }

    public static void WriteFloat32(string path, ReadOnlySpan<float> data, ReadOnlySpan<int> shape)
    {
        using var stream = File.Create(path);
        WriteFloat32(stream, data, shape);
    }

    public static void WriteFloat32(Stream s, ReadOnlySpan<float> data, ReadOnlySpan<int> shape)
    {
        WriteHeader(s, "<f4", shape, data.Length);
        if (BitConverter.IsLittleEndian)
        {
            s.Write(MemoryMarshal.AsBytes(data));
            return;
        }
        Span<byte> buffer = stackalloc byte[4];
        foreach (float v in data)
        {
            BinaryPrimitives.WriteSingleLittleEndian(buffer, v);
            s.Write(buffer);
        }
    }

    public static void WriteUInt8(string path, ReadOnlySpan<byte> data, ReadOnlySpan<int> shape)
    {
        using var stream = File.Create(path);
        WriteUInt8(stream, data, shape);
    }

    public static void WriteUInt8(Stream s, ReadOnlySpan<byte> data, ReadOnlySpan<int> shape)
    {
        WriteHeader(s, "|u1", shape, data.Length);
        s.Write(data);
    }

    /// <summary>The header bytes (magic to the final newline) for an array of this dtype and shape.</summary>
    internal static byte[] BuildHeader(string descr, ReadOnlySpan<int> shape)
    {
        var dict = new StringBuilder();
        dict.Append("{'descr': '").Append(descr).Append("', 'fortran_order': False, 'shape': (");
        for (int i = 0; i < shape.Length; i++)
        {
            if (i > 0) dict.Append(", ");
            dict.Append(shape[i].ToString(CultureInfo.InvariantCulture));
        }
        if (shape.Length == 1) dict.Append(',');
        dict.Append("), }");

        // Version 1.0 has a 2-byte header length; fall back to 2.0 (4 bytes) only when the dict is too long for it.
        int prefixV1 = Magic.Length + 2 + 2;
        int total = Pad(prefixV1 + dict.Length + 1);
        int version = total - prefixV1 <= ushort.MaxValue ? 1 : 2;
        int prefix = version == 1 ? prefixV1 : Magic.Length + 2 + 4;
        total = Pad(prefix + dict.Length + 1);
        int headerLength = total - prefix;
        dict.Append(' ', headerLength - dict.Length - 1).Append('\n');

        var bytes = new byte[total];
        Magic.CopyTo(bytes);
        bytes[6] = (byte)version;
        bytes[7] = 0;
        if (version == 1) BinaryPrimitives.WriteUInt16LittleEndian(bytes.AsSpan(8), (ushort)headerLength);
        else BinaryPrimitives.WriteUInt32LittleEndian(bytes.AsSpan(8), (uint)headerLength);
        Encoding.ASCII.GetBytes(dict.ToString(), bytes.AsSpan(prefix));
        return bytes;
    }

    private static int Pad(int length) => (length + Alignment - 1) / Alignment * Alignment;

    private static void WriteHeader(Stream s, string descr, ReadOnlySpan<int> shape, int dataLength)
    {
        long count = 1;
        foreach (int d in shape)
        {
            if (d < 0)
                throw new ScoringInputException(ScoringErrorCodes.NpyFormat, $"NPY shape [{Join(shape)}] has a negative dimension.");
            count *= d;
        }
        if (count != dataLength)
            throw new ScoringInputException(ScoringErrorCodes.NpyFormat,
                $"NPY shape [{Join(shape)}] holds {count} values but {dataLength} were given.");
        s.Write(BuildHeader(descr, shape));
    }

    private static FileStream OpenForRead(string path)
    {
        try
        {
            return File.OpenRead(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw Format($"cannot open '{path}': {e.Message}");
        }
    }

    private readonly record struct Header(string Descr, int[] Shape);

    private static Header ReadHeader(Stream s)
    {
        Span<byte> prefix = stackalloc byte[8];
        int got = ReadFully(s, prefix);
        if (got < 8 || !prefix[..6].SequenceEqual(Magic))
            throw Format("not an NPY file: it does not start with the magic string \\x93NUMPY.");
        byte major = prefix[6], minor = prefix[7];
        if (major is < 1 or > 3 || minor != 0)
            throw Format($"NPY version {major}.{minor} is not supported (1.0, 2.0 and 3.0 are).");

        Span<byte> lengthBytes = stackalloc byte[4];
        int lengthSize = major == 1 ? 2 : 4;
        if (ReadFully(s, lengthBytes[..lengthSize]) < lengthSize)
            throw Format("the NPY header length is cut off.");
        long headerLength = major == 1
            ? BinaryPrimitives.ReadUInt16LittleEndian(lengthBytes)
            : BinaryPrimitives.ReadUInt32LittleEndian(lengthBytes);
        if (headerLength > MaxHeaderLength)
            throw Format($"the NPY header claims {headerLength} bytes; at most {MaxHeaderLength} are accepted.");

        var headerBytes = new byte[headerLength];
        int read = ReadFully(s, headerBytes);
        if (read < headerLength)
            throw Format($"the NPY header is cut off: expected {headerLength} bytes, found {read}.");
        string text;
        try
        {
            // Version 3.0 allows UTF-8 in the header; 1.0 and 2.0 are Latin-1, which is ASCII for every valid header.
            text = (major == 3 ? new UTF8Encoding(false, true) : Encoding.Latin1).GetString(headerBytes);
        }
        catch (DecoderFallbackException)
        {
            throw Format("the NPY 3.0 header is not valid UTF-8.");
        }
        return HeaderParser.Parse(text);
    }

    private static long ElementCount(int[] shape)
    {
        long count = 1;
        foreach (int d in shape)
        {
            count *= d;
            if (count > Array.MaxLength)
                throw Format($"NPY shape [{Join(shape)}] has more elements than one array can hold ({Array.MaxLength}).");
        }
        return count;
    }

    private static T[] ReadElements<T>(Stream s, long count, int size) where T : unmanaged
    {
        if (!BitConverter.IsLittleEndian && size > 1)
            throw Format("reading multi-byte elements needs a little-endian host.");
        long expectedBytes = count * size;
        if (s.CanSeek)
        {
            long remaining = s.Length - s.Position;
            if (remaining < expectedBytes)
                throw Format($"the data is cut off: expected {expectedBytes} bytes of data, found {remaining}.");
            if (remaining > expectedBytes)
                throw Format($"the data is longer than its shape: expected {expectedBytes} bytes of data, found {remaining}.");
        }

        // A stream of unknown length grows the array as data arrives, so a forged shape cannot make us allocate gigabytes up front.
        const int initialElements = 1 << 22;
        var data = new T[s.CanSeek ? count : Math.Min(count, initialElements)];
        long filled = 0;
        while (true)
        {
            var target = MemoryMarshal.AsBytes(data.AsSpan((int)filled));
            int got = ReadFully(s, target);
            filled += got / size;
            if (got < target.Length)
            {
                long foundBytes = filled * size + got % size;
                throw Format($"the data is cut off: expected {expectedBytes} bytes of data, found {foundBytes}.");
            }
            if (filled == count) break;
            Array.Resize(ref data, (int)Math.Min(count, (long)data.Length * 2));
        }
        if (!s.CanSeek && s.ReadByte() >= 0)
            throw Format($"the data is longer than its shape: expected {expectedBytes} bytes of data, found more.");
        return data;
    }

    private static int ReadFully(Stream s, Span<byte> buffer)
    {
        int total = 0;
        while (total < buffer.Length)
        {
            int n = s.Read(buffer[total..]);
            if (n == 0) break;
            total += n;
        }
        return total;
    }

    internal static ScoringInputException Format(string message) =>
        new(ScoringErrorCodes.NpyFormat, "NPY: " + message);

    private static string Join(ReadOnlySpan<int> shape) => string.Join(", ", shape.ToArray());
}
