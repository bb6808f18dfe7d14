using System.Buffers.Binary;
using System.IO.Compression;
using Strayspot.Service.Batches;

namespace Strayspot.Tests.Service.Batches;

public class BatchArchiveLimitTests
{
    /// <summary>
    /// A zip whose headers under-declare an entry's size (8 MiB of zeros declared as 100 bytes): the declared-size check
    /// passes, so only the count of bytes actually written stands between the upload and the disk. Offsets from the
    /// ZIP application note (PKWARE APPNOTE.TXT, an open standard): local header uncompressed size at +22, central
    /// directory uncompressed size at +24.
    /// </summary>
    [Fact]
    public void A_zip_lying_about_its_sizes_never_writes_more_than_the_byte_limit()
    {
        string dir = Path.Combine(Path.GetTempPath(), "strayspot-liar-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(dir);
        try
        {
            byte[] zip;
            using (var ms = new MemoryStream())
            {
                using (var z = new ZipArchive(ms, ZipArchiveMode.Create, leaveOpen: true))
                using (var s = z.CreateEntry("big.png", CompressionLevel.SmallestSize).Open())
                    s.Write(new byte[8 * 1024 * 1024]);
                zip = ms.ToArray();
            }
            int local = 0;
            Assert.Equal(0x04034b50u, BinaryPrimitives.ReadUInt32LittleEndian(zip.AsSpan(local)));
            Assert.Equal(8u * 1024 * 1024, BinaryPrimitives.ReadUInt32LittleEndian(zip.AsSpan(local + 22)));
            BinaryPrimitives.WriteUInt32LittleEndian(zip.AsSpan(local + 22), 100);
            int central = zip.AsSpan().LastIndexOf([(byte)0x50, (byte)0x4b, (byte)0x01, (byte)0x02]);
            Assert.True(central > 0);
            BinaryPrimitives.WriteUInt32LittleEndian(zip.AsSpan(central + 24), 100);
            string path = Path.Combine(dir, "liar.zip");
            File.WriteAllBytes(path, zip);

            string dest = Path.Combine(dir, "out");
            const long limit = 1024 * 1024;
            try
            {
                BatchArchive.Extract(path, "liar.zip", dest, new ArchiveLimits(100, limit));
            }
            catch (BatchException e)
            {
                Assert.Contains(e.Code, new[] { "archive-too-large", "archive-invalid" });
            }
            long written = Directory.Exists(dest) ? Directory.EnumerateFiles(dest, "*", SearchOption.AllDirectories).Sum(f => new FileInfo(f).Length) : 0;
            Assert.True(written <= limit, $"{written} bytes written past the {limit}-byte limit");
        }
        finally
        {
            Directory.Delete(dir, recursive: true);
        }
    }

    [Theory]
    [InlineData("../x.png")]
    [InlineData("a/../../x.png")]
    [InlineData("/abs/x.png")]
    [InlineData("\\\\server\\share\\x.png")]
    [InlineData("C:/x.png")]
    [InlineData("a\\..\\..\\x.png")]
    public void Entry_names_that_leave_the_folder_are_refused(string name)
    {
        var e = Assert.Throws<BatchException>(() => BatchArchive.CheckName(name, out _));
        Assert.Equal("archive-escape", e.Code);
    }

    [Theory]
    [InlineData("./a.png", "a.png")]
    [InlineData("day1/cam2/a.png", "day1/cam2/a.png")]
    [InlineData("day1//a.png", "day1/a.png")]
    public void Plain_relative_names_are_kept(string name, string expected) =>
        Assert.Equal(expected, string.Join('/', BatchArchive.CheckName(name, out _)));
}
