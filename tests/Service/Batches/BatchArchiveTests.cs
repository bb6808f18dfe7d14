using System.Formats.Tar;
using System.IO.Compression;
using System.Net;
using System.Net.Http.Headers;
using System.Text.Json;
using Strayspot.Tests.Service.Api;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Batches;

public class BatchArchiveTests
{
    private static byte[] Zip(Action<ZipArchive> fill)
    {
        using var ms = new MemoryStream();
        using (var zip = new ZipArchive(ms, ZipArchiveMode.Create, leaveOpen: true)) fill(zip);
        return ms.ToArray();
    }

    private static void Add(ZipArchive zip, string name, byte[] data, CompressionLevel level = CompressionLevel.Fastest)
    {
        using var s = zip.CreateEntry(name, level).Open();
        s.Write(data);
    }

    private static async Task<HttpResponseMessage> UploadAsync(HttpClient client, byte[] archive, string fileName, string? batchId = null)
    {
        using var content = new MultipartFormDataContent();
        content.Add(new StringContent(Model), "model");
        if (batchId is not null) content.Add(new StringContent(batchId), "batchId");
        var file = new ByteArrayContent(archive);
        file.Headers.ContentType = new MediaTypeHeaderValue("application/octet-stream");
        content.Add(file, "file", fileName);
        return await client.PostAsync("/v1/batches", content);
    }

    [Fact]
    public async Task Zip_of_frames_is_unpacked_scored_and_named_by_entry_path()
    {
        await using var s = await StartAsync();
        string src = Path.Combine(s.Root, "src");
        var names = WriteFrames(src, 3, debris: 1);
        var archive = Zip(z =>
        {
            foreach (string n in names) Add(z, "day1/" + n, File.ReadAllBytes(Path.Combine(src, n)));
            Add(z, "day1/notes.txt", "not a frame"u8.ToArray());
            Add(z, "__hidden/.thumb.png", File.ReadAllBytes(Path.Combine(src, names[0])));
        });
        var r = await UploadAsync(s.Client, archive, "day1.zip", "zip-1");
        Assert.Equal(HttpStatusCode.Created, r.StatusCode);
        Assert.Equal(3, JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement.GetProperty("framesAdded").GetInt32());
        await WaitForStateAsync(s.Client, "zip-1", "done");
        var ids = (await ManifestAsync(s.Client, "zip-1")).Select(l => l.GetProperty("frameId").GetString()).Order(StringComparer.Ordinal);
        Assert.Equal(names.Select(n => "day1/" + n), ids);

        // The same archive again: nothing new to score.
        r = await UploadAsync(s.Client, archive, "day1.zip", "zip-1");
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        Assert.Equal(0, JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement.GetProperty("framesAdded").GetInt32());
    }

    [Fact]
    public async Task Tar_of_frames_is_accepted()
    {
        await using var s = await StartAsync();
        string src = Path.Combine(s.Root, "src");
        var names = WriteFrames(src, 2);
        using var ms = new MemoryStream();
        using (var tar = new TarWriter(ms, TarEntryFormat.Pax, leaveOpen: true))
            foreach (string n in names) tar.WriteEntry(Path.Combine(src, n), "./" + n);
        var r = await UploadAsync(s.Client, ms.ToArray(), "frames.tar", "tar-1");
        Assert.Equal(HttpStatusCode.Created, r.StatusCode);
        await WaitForStateAsync(s.Client, "tar-1", "done");
        Assert.Equal(2, (await ManifestAsync(s.Client, "tar-1")).Count);
    }

    [Fact]
    public async Task Entries_leaving_the_folder_and_links_are_refused_and_nothing_is_written_outside()
    {
        await using var s = await StartAsync();
        byte[] png = File.ReadAllBytes(Path.Combine(Path.Combine(s.Root, "src"), WriteFrames(Path.Combine(s.Root, "src"), 1)[0]));

        var r = await UploadAsync(s.Client, Zip(z => { Add(z, "ok.png", png); Add(z, "../x.png", png); }), "a.zip");
        await TestService.ProblemAsync(r, 400, "archive-escape");
        r = await UploadAsync(s.Client, Zip(z => Add(z, "a/../../../x.png", png)), "a.zip");
        await TestService.ProblemAsync(r, 400, "archive-escape");
        r = await UploadAsync(s.Client, Zip(z => Add(z, "/tmp/x.png", png)), "a.zip");
        await TestService.ProblemAsync(r, 400, "archive-escape");

        // A zip entry marked as a Unix symbolic link (mode 0120777 in the external attributes).
        r = await UploadAsync(s.Client, Zip(z =>
        {
            var e = z.CreateEntry("link.png");
            e.ExternalAttributes = unchecked((int)(0xA1FFu << 16));
            using var w = e.Open();
            w.Write("/etc/passwd"u8);
        }), "a.zip");
        await TestService.ProblemAsync(r, 400, "archive-escape");

        using (var ms = new MemoryStream())
        {
            using (var tar = new TarWriter(ms, TarEntryFormat.Pax, leaveOpen: true))
                tar.WriteEntry(new PaxTarEntry(TarEntryType.SymbolicLink, "frame.png") { LinkName = "/etc/passwd" });
            r = await UploadAsync(s.Client, ms.ToArray(), "a.tar");
            await TestService.ProblemAsync(r, 400, "archive-escape");
        }

        r = await UploadAsync(s.Client, "this is not an archive at all"u8.ToArray(), "a.zip");
        await TestService.ProblemAsync(r, 400, "archive-invalid");
        r = await UploadAsync(s.Client, Zip(z => Add(z, "readme.txt", "x"u8.ToArray())), "a.zip");
        await TestService.ProblemAsync(r, 400, "batch-empty");

        Assert.False(File.Exists(Path.Combine(s.DataRoot, "x.png")));
        Assert.False(File.Exists(Path.Combine(s.DataRoot, "batches", "x.png")));
        Assert.False(File.Exists(Path.Combine(s.Root, "x.png")));
        Assert.Empty(Directory.EnumerateFileSystemEntries(Path.Combine(s.DataRoot, "batches", ".uploads")));
        Assert.Equal(0, (await BatchTestKit.GetAsync(s.Client, "/v1/batches")).GetProperty("batches").GetArrayLength());
    }

    [Fact]
    public async Task Archives_with_too_many_entries_or_too_many_bytes_are_413_archive_too_large()
    {
        await using var s = await StartAsync(extra: new Dictionary<string, string?>
        {
            ["Service:Batches:MaxArchiveEntries"] = "50",
            ["Service:Batches:MaxArchiveBytes"] = (1024 * 1024).ToString(),
        });
        var many = Zip(z => { for (int i = 0; i < 60; i++) Add(z, $"f{i:D3}.png", [1]); });
        await TestService.ProblemAsync(await UploadAsync(s.Client, many, "many.zip"), 413, "archive-too-large");

        // 8 MiB of zeros deflate to a few KiB: the declared size gives the bomb away before anything is written.
        var bomb = Zip(z => Add(z, "big.png", new byte[8 * 1024 * 1024], CompressionLevel.SmallestSize));
        Assert.True(bomb.Length < 64 * 1024, $"bomb is {bomb.Length} bytes");
        var p = await TestService.ProblemAsync(await UploadAsync(s.Client, bomb, "bomb.zip"), 413, "archive-too-large");
        Assert.Contains("1048576", p.GetProperty("detail").GetString());

        using var ms = new MemoryStream();
        using (var tar = new TarWriter(ms, TarEntryFormat.Pax, leaveOpen: true))
        {
            var e = new PaxTarEntry(TarEntryType.RegularFile, "big.png") { DataStream = new MemoryStream(new byte[2 * 1024 * 1024]) };
            tar.WriteEntry(e);
        }
        await TestService.ProblemAsync(await UploadAsync(s.Client, ms.ToArray(), "big.tar"), 413, "archive-too-large");
        Assert.Empty(Directory.EnumerateFileSystemEntries(Path.Combine(s.DataRoot, "batches", ".uploads")));
    }
}
