using System.Buffers.Binary;
using System.Text;
using Strayspot.Scoring.Logits;

namespace Strayspot.Tests.Scoring.Logits;

public class NpyTests
{
    private static byte[] Write(float[] data, int[] shape)
    {
        var ms = new MemoryStream();
        Npy.WriteFloat32(ms, data, shape);
        return ms.ToArray();
    }

    [Fact]
    public void Float32_round_trips_values_and_shape()
    {
        var rng = new Random(7);
        var data = new float[2 * 3 * 5];
        for (int i = 0; i < data.Length; i++) data[i] = (float)(rng.NextDouble() * 200 - 100);
        data[0] = float.Epsilon; data[1] = -0f; data[2] = float.MaxValue;
        var back = Npy.ReadFloat32(new MemoryStream(Write(data, [2, 3, 5])));
        Assert.Equal(new[] { 2, 3, 5 }, back.Shape);
        Assert.Equal(data, back.Data);
        Assert.True(float.IsNegative(back.Data[1]));
    }

    [Fact]
    public void Round_trip_through_a_file_and_of_rank_one_and_zero()
    {
        string path = Path.Combine(Path.GetTempPath(), $"npy-{Guid.NewGuid():N}.npy");
        try
        {
            Npy.WriteFloat32(path, [1f, 2f, 3f], [3]);
            var a = Npy.ReadFloat32(path);
            Assert.Equal(new[] { 3 }, a.Shape);
            Assert.Equal(new[] { 1f, 2f, 3f }, a.Data);
        }
        finally { File.Delete(path); }
        var scalar = Npy.ReadFloat32(new MemoryStream(Write([4.5f], [])));
        Assert.Empty(scalar.Shape);
        Assert.Equal(new[] { 4.5f }, scalar.Data);
        var empty = Npy.ReadFloat32(new MemoryStream(Write([], [0, 4])));
        Assert.Equal(new[] { 0, 4 }, empty.Shape);
        Assert.Empty(empty.Data);
    }

    // Outside reference: the NPY format specification (numpy's "format.py" / NEP 1): magic "\x93NUMPY", one byte
    // major and one byte minor version, a little-endian uint16 header length (version 1.0), then an ASCII Python dict
    // literal with 'descr', 'fortran_order', 'shape', padded with spaces and ending in '\n' so that the data starts at
    // a multiple of 64 bytes. The dict text below is the form numpy itself writes for a (2, 3) float32 array.
    [Fact]
    public void Header_is_byte_exact_per_the_NPY_format_specification()
    {
        byte[] file = Write(new float[6], [2, 3]);
        const string dict = "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }";
        int headerLength = 128 - 10;
        var expected = new List<byte> { 0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 1, 0, (byte)(headerLength & 0xFF), (byte)(headerLength >> 8) };
        expected.AddRange(Encoding.ASCII.GetBytes(dict.PadRight(headerLength - 1) + "\n"));
        Assert.Equal(expected.ToArray(), file[..128]);
        Assert.Equal(128 + 6 * 4, file.Length);
    }

    // Same specification: a one-element tuple is written "(5,)" as in Python, and any shape keeps data 64-aligned.
    [Theory]
    [InlineData(new[] { 5 }, "(5,)")]
    [InlineData(new[] { 1, 19, 512, 1024 }, "(1, 19, 512, 1024)")]
    [InlineData(new int[0], "()")]
    public void Header_shape_literal_and_alignment_follow_the_NPY_specification(int[] shape, string literal)
    {
        byte[] header = Npy.BuildHeader("<f4", shape);
        Assert.Equal(0, header.Length % 64);
        int len = BinaryPrimitives.ReadUInt16LittleEndian(header.AsSpan(8));
        Assert.Equal(header.Length - 10, len);
        string text = Encoding.ASCII.GetString(header, 10, len);
        Assert.Contains("'shape': " + literal + ", }", text);
        Assert.EndsWith("\n", text);
        Assert.Equal(text.TrimEnd('\n').TrimEnd(' ') + new string(' ', len - 1 - text.TrimEnd('\n').TrimEnd(' ').Length) + "\n", text);
    }

    private static byte[] Build(byte major, string dict, byte[] data)
    {
        var ms = new MemoryStream();
        ms.Write([0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', major, 0]);
        var text = Encoding.UTF8.GetBytes(dict + "\n");
        if (major == 1) { var b = new byte[2]; BinaryPrimitives.WriteUInt16LittleEndian(b, (ushort)text.Length); ms.Write(b); }
        else { var b = new byte[4]; BinaryPrimitives.WriteUInt32LittleEndian(b, (uint)text.Length); ms.Write(b); }
        ms.Write(text);
        ms.Write(data);
        return ms.ToArray();
    }

    private static byte[] Floats(params float[] v)
    {
        var b = new byte[v.Length * 4];
        for (int i = 0; i < v.Length; i++) BinaryPrimitives.WriteSingleLittleEndian(b.AsSpan(i * 4), v[i]);
        return b;
    }

    [Theory]
    [InlineData(2)]
    [InlineData(3)]
    public void Versions_2_and_3_are_read(byte major)
    {
        var a = Npy.ReadFloat32(new MemoryStream(Build(major, "{\"descr\": \"<f4\", \"fortran_order\": False, \"shape\": (2,)}", Floats(1.5f, -2f))));
        Assert.Equal(new[] { 2 }, a.Shape);
        Assert.Equal(new[] { 1.5f, -2f }, a.Data);
    }

    [Fact]
    public void Float64_is_narrowed_to_float32()
    {
        var data = new byte[16];
        BinaryPrimitives.WriteDoubleLittleEndian(data, 0.1);
        BinaryPrimitives.WriteDoubleLittleEndian(data.AsSpan(8), -3e5);
        var a = Npy.ReadFloat32(new MemoryStream(Build(1, "{'descr': '<f8', 'fortran_order': False, 'shape': (1, 2), }", data)));
        Assert.Equal(new[] { 0.1f, -3e5f }, a.Data);
    }

    private static ScoringInputException Refused(byte[] bytes, bool seekable = true)
    {
        Stream s = seekable ? new MemoryStream(bytes) : new ForwardOnlyStream(bytes);
        var e = Assert.Throws<ScoringInputException>(() => Npy.ReadFloat32(s));
        Assert.Equal(ScoringErrorCodes.NpyFormat, e.Code);
        return e;
    }

    [Theory]
    [InlineData(true)]
    [InlineData(false)]
    public void Truncated_data_names_expected_and_found_bytes(bool seekable)
    {
        var e = Refused(Build(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (1, 4, 512, 512), }", new byte[1000]), seekable);
        Assert.Contains("expected 4194304 bytes of data, found 1000", e.Message);
    }

    [Theory]
    [InlineData(true)]
    [InlineData(false)]
    public void Extra_data_after_the_array_is_refused(bool seekable)
    {
        var e = Refused(Build(1, "{'descr': '<f4', 'fortran_order': False, 'shape': (2,), }", new byte[12]), seekable);
        Assert.Contains("expected 8 bytes", e.Message);
    }

    [Fact]
    public void Bad_magic_is_refused()
    {
        var bytes = Write([1f], [1]);
        bytes[1] = (byte)'X';
        Assert.Contains("magic", Refused(bytes).Message);
        Assert.Contains("magic", Refused([1, 2, 3]).Message);
    }

    [Fact]
    public void Unknown_version_is_refused_with_its_number()
    {
        var bytes = Write([1f], [1]);
        bytes[6] = 4;
        Assert.Contains("4.0", Refused(bytes).Message);
    }

    [Theory]
    [InlineData("{'descr': '<i4', 'fortran_order': False, 'shape': (2,), }", "'<i4'")]
    [InlineData("{'descr': '>f4', 'fortran_order': False, 'shape': (2,), }", "'>f4'")]
    [InlineData("{'descr': '<f4', 'fortran_order': True, 'shape': (2,), }", "fortran_order")]
    [InlineData("{'descr': '<f4', 'shape': (2,), }", "'fortran_order'")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (2, -1), }", "bad header")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (99999999999,), }", "99999999999")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (65536, 65536), }", "more elements")]
    [InlineData("{'descr': '<f4', 'fortran_order': Maybe, 'shape': (2,), }", "True or False")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (2,), 'extra': 1}", "'extra'")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (2,)", "bad header")]
    [InlineData("not a dict", "bad header")]
    public void Bad_header_or_dtype_is_refused_naming_the_problem(string dict, string named)
    {
        Assert.Contains(named, Refused(Build(1, dict, new byte[8])).Message);
    }

    [Fact]
    public void Cut_off_header_is_refused_with_its_lengths()
    {
        var bytes = Write([1f], [1]);
        Assert.Contains("expected 118 bytes, found 20", Refused(bytes[..30]).Message);
    }

    [Fact]
    public void Write_refuses_a_shape_that_does_not_match_the_data()
    {
        var e = Assert.Throws<ScoringInputException>(() => Npy.WriteFloat32(new MemoryStream(), new float[5], [2, 3]));
        Assert.Contains("6", e.Message);
        Assert.Contains("5", e.Message);
    }

    [Fact]
    public void UInt8_masks_round_trip()
    {
        var ms = new MemoryStream();
        Npy.WriteUInt8(ms, [0, 1, 255, 7], [2, 2]);
        Assert.Contains("'descr': '|u1'", Encoding.ASCII.GetString(ms.ToArray(), 10, 118));
        ms.Position = 0;
        var a = Npy.ReadUInt8(ms);
        Assert.Equal(new byte[] { 0, 1, 255, 7 }, a.Data);
        Assert.Equal(new[] { 2, 2 }, a.Shape);
    }

    private sealed class ForwardOnlyStream(byte[] bytes) : Stream
    {
        private readonly MemoryStream _inner = new(bytes);
        public override bool CanRead => true;
        public override bool CanSeek => false;
        public override bool CanWrite => false;
        public override long Length => throw new NotSupportedException();
        public override long Position { get => throw new NotSupportedException(); set => throw new NotSupportedException(); }
        public override void Flush() { }
        // Short reads on purpose: a network stream returns what it has.
        public override int Read(byte[] buffer, int offset, int count) => _inner.Read(buffer, offset, Math.Min(count, 7));
        public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();
        public override void SetLength(long value) => throw new NotSupportedException();
        public override void Write(byte[] buffer, int offset, int count) => throw new NotSupportedException();
    }
}
