using System.Net.Http.Json;
using Strayspot.Service.Batches;
using Strayspot.Service.Hosting;
using Strayspot.Tests.Service.Batches;

namespace Strayspot.Tests.Service.Api;

/// <summary>Errors shown to clients name paths relative to the data folder or the batch folder; the server log keeps them whole.</summary>
public class ClientPathTests
{
    [Fact]
    public async Task A_failed_batch_frame_and_a_missing_dataset_show_no_absolute_server_path()
    {
        await using var s = await BatchTestKit.StartAsync();
        string folder = Path.Combine(s.DataRoot, "mixed");
        BatchTestKit.WriteFrames(folder, 1);
        File.WriteAllText(Path.Combine(folder, "broken.png"), "not a png");
        await BatchTestKit.PostFolderAsync(s.Client, "mixed", batchId: "paths-1");
        await BatchTestKit.WaitForStateAsync(s.Client, "paths-1", "done");

        string frames = await s.Client.GetStringAsync("/v1/batches/paths-1/frames");
        string manifest = await s.Client.GetStringAsync("/v1/batches/paths-1/manifest");
        Assert.Contains("mixed/broken.png", frames);
        Assert.DoesNotContain(s.Root, frames);
        Assert.DoesNotContain(s.Root, manifest);

        var r = await s.Client.PostAsJsonAsync("/v1/models/demo/evaluations", new { dataset = "held-out" });
        var p = await TestService.ProblemAsync(r, 404, "dataset-missing");
        Assert.Contains("'held-out'", p.GetProperty("detail").GetString());
        Assert.DoesNotContain(s.Root, p.GetProperty("detail").GetString());

        // The server's own log keeps the absolute path for whoever runs it.
        Assert.Contains(Path.Combine(folder, "broken.png"), s.Log.AllText());
    }

    [Theory]
    [InlineData("/srv/data/mixed/broken.png is damaged", "mixed/broken.png is damaged")]
    [InlineData("Dataset folder '/srv/data/held-out' does not exist.", "Dataset folder 'held-out' does not exist.")]
    [InlineData("Batch folder '/srv/data/batches/b-1/frames/00001' failed", "Batch folder 'frames/00001' failed")]
    [InlineData("The data folder '/srv/data' is full", "The data folder '.' is full")]
    [InlineData("/srv/data2/x and /srv/data-old stay", "/srv/data2/x and /srv/data-old stay")]
    public void Paths_under_a_root_are_made_relative_to_the_most_specific_one(string message, string expected) =>
        Assert.Equal(expected, ClientPaths.Relative(message, "/srv/data/batches/b-1", "/srv/data"));

    [Fact]
    public void A_zip_entry_whose_header_understates_its_size_or_fails_its_crc_is_archive_invalid()
    {
        byte[] data = new byte[5000];
        new Random(3).NextBytes(data);
        string root = Path.Combine(Path.GetTempPath(), "strayspot-zip-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(root);
        try
        {
            var limits = new ArchiveLimits(100, 1 << 20);
            foreach (var (zip, what) in new[]
                     {
                         // The zip reader stops at the declared size; the CRC-32 over what it gave is what exposes the cut.
                         (HostileInputTests.PatchedZip(data, size: 100), "CRC-32"),
                         (HostileInputTests.PatchedZip(data, crc: 0x12345678), "CRC-32 check"),
                     })
            {
                string path = Path.Combine(root, Guid.NewGuid().ToString("N") + ".zip");
                File.WriteAllBytes(path, zip);
                var e = Assert.Throws<BatchException>(() => BatchArchive.Extract(path, "frames.zip", Path.Combine(root, "out-" + Guid.NewGuid().ToString("N")), limits));
                Assert.Equal("archive-invalid", e.Code);
                Assert.Contains(what, e.Message);
            }
            // The same archive untouched unpacks whole.
            string good = Path.Combine(root, "good.zip");
            File.WriteAllBytes(good, HostileInputTests.Zip(("frames/cam_00.png", data)));
            var frames = BatchArchive.Extract(good, "good.zip", Path.Combine(root, "good"), limits);
            Assert.Equal(data, File.ReadAllBytes(Path.Combine(root, "good", frames.Single())));
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }
}
