using System.Net;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Logging.Abstractions;
using Microsoft.Extensions.Options;
using Strayspot.Service.Hosting;
using Strayspot.Tests.Service.Api;

namespace Strayspot.Tests.Service.Hosting;

public class ArtifactStoreTests
{
    private sealed class Clock(DateTimeOffset now) : TimeProvider
    {
        public DateTimeOffset Now { get; set; } = now;
        public override DateTimeOffset GetUtcNow() => Now;
    }

    [Fact]
    public void Sweep_deletes_only_frame_folders_older_than_the_retention()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-artifacts-" + Guid.NewGuid().ToString("N"));
        var now = new DateTimeOffset(2026, 12, 1, 12, 0, 0, TimeSpan.Zero);
        var options = Options.Create(new ServiceOptions { DataRoot = root, ArtifactRetention = TimeSpan.FromMinutes(30) });
        var store = new ArtifactStore(options, new Clock(now), NullLogger<ArtifactStore>.Instance);
        try
        {
            var (oldId, oldFolder) = store.CreateFrameFolder();
            var (newId, newFolder) = store.CreateFrameFolder();
            string foreign = Path.Combine(store.Root, "keep-me");
            Directory.CreateDirectory(foreign);
            File.WriteAllText(Path.Combine(oldFolder, "mask.png"), "x");
            File.WriteAllText(Path.Combine(newFolder, "mask.png"), "x");
            Directory.SetLastWriteTimeUtc(oldFolder, now.UtcDateTime.AddMinutes(-31));
            Directory.SetLastWriteTimeUtc(newFolder, now.UtcDateTime.AddMinutes(-29));
            Directory.SetLastWriteTimeUtc(foreign, now.UtcDateTime.AddDays(-5));

            Assert.NotNull(store.Find(oldId, "mask"));
            Assert.Equal(1, store.SweepOnce());
            Assert.Null(store.Find(oldId, "mask"));
            Assert.NotNull(store.Find(newId, "mask"));
            Assert.True(Directory.Exists(foreign)); // not a frame id: not ours to delete
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }

    [Theory]
    [InlineData("../../etc", "mask")]
    [InlineData("0123456789abcdef0123456789abcdef", "passwd")]
    [InlineData("0123456789ABCDEF0123456789ABCDEF", "mask")]
    public void Malformed_ids_and_names_find_nothing(string id, string artifact)
    {
        var store = new ArtifactStore(Options.Create(new ServiceOptions { DataRoot = Path.GetTempPath() }), TimeProvider.System, NullLogger<ArtifactStore>.Instance);
        Assert.Null(store.Find(id, artifact));
    }

    [Fact]
    public async Task Artifacts_are_served_while_present_and_404_problems_when_gone_or_unknown()
    {
        await using var s = await TestService.StartAsync();
        var store = s.App.Services.GetRequiredService<ArtifactStore>();
        var (id, folder) = store.CreateFrameFolder();
        byte[] png = [0x89, (byte)'P', (byte)'N', (byte)'G', 1, 2, 3];
        File.WriteAllBytes(Path.Combine(folder, "heat.png"), png);

        var r = await s.Client.GetAsync($"/v1/frames/{id}/heat");
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        Assert.Equal("image/png", r.Content.Headers.ContentType?.MediaType);
        Assert.Equal(png, await r.Content.ReadAsByteArrayAsync());

        await TestService.ProblemAsync(await s.Client.GetAsync($"/v1/frames/{id}/mask"), 404, "artifact-not-found");
        await TestService.ProblemAsync(await s.Client.GetAsync($"/v1/frames/{id}/secrets"), 404, "artifact-not-found");
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/frames/..%2F..%2Fetc/heat"), 404, "artifact-not-found");
        Directory.Delete(folder, recursive: true);
        await TestService.ProblemAsync(await s.Client.GetAsync($"/v1/frames/{id}/heat"), 404, "artifact-not-found");
    }
}
