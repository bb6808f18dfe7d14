using System.Net.Http.Json;
using System.Text.Json;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using Microsoft.Extensions.DependencyInjection;
using Strayspot.Service.Demo;
using Strayspot.Service.Hosting;
using Strayspot.Tests.Service.Batches;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Review;

/// <summary>
/// The service on a real socket (Kestrel on 127.0.0.1) with the demo model and a done batch holding one still frame
/// and one short drive-by video encoded by ffmpeg in the test (17 frames of 256×128, about 10 s to score here).
/// </summary>
public sealed class TrackReviewKit : IAsyncDisposable
{
    public const string Batch = "rig-1";
    public const string Video = "pass.mp4";
    public const string Still = "cam_00.png";

    public required WebApplication App { get; init; }
    public required string Root { get; init; }
    public required HttpClient Http { get; init; }
    public required string BaseUrl { get; init; }
    /// <summary>Seq of the video and of the still frame in the batch.</summary>
    public int VideoSeq { get; private set; }
    public int StillSeq { get; private set; }

    public string PageUrl => BaseUrl + "/review/#batch=" + Batch + "&seq=" + VideoSeq;

    public static async Task<TrackReviewKit> StartAsync()
    {
        string root = Directory.CreateTempSubdirectory("strayspot-tracks-").FullName;
        string models = Path.Combine(root, "models"), data = Path.Combine(root, "data");
        BatchTestKit.CopyDemoModel(models);
        string folder = Path.Combine(data, "rig");
        BatchTestKit.WriteFrames(folder, 1);
        var drive = new ApronDriveBy(frameWidth: BatchTestKit.Width, frameHeight: BatchTestKit.Height, panoramaWidth: 512, step: 16, debris: 3);
        VideoFiles.EncodeMp4(Path.Combine(folder, Video), BatchTestKit.Width, BatchTestKit.Height, drive.FrameRate,
            Enumerable.Range(0, drive.FrameCount).Select(drive.Rgb));
        var app = ServiceHost.Build(new ServiceHostSettings
        {
            ModelsRoot = models, DataRoot = data, Urls = ["http://127.0.0.1:0"], ConsoleLog = false, Configuration = BatchTestKit.Config(),
        });
        await app.StartAsync();
        string address = app.Services.GetRequiredService<IServer>().Features.Get<IServerAddressesFeature>()!.Addresses.First();
        Assert.StartsWith("http://127.0.0.1:", address);
        var kit = new TrackReviewKit
        {
            App = app, Root = root, BaseUrl = address.TrimEnd('/'),
            Http = new HttpClient { BaseAddress = new Uri(address), Timeout = TimeSpan.FromSeconds(60) },
        };
        var submit = await kit.Http.PostAsJsonAsync("/v1/batches", new { model = BatchTestKit.Model, folder = "rig", batchId = Batch });
        Assert.True(submit.IsSuccessStatusCode, await submit.Content.ReadAsStringAsync());
        await BatchTestKit.WaitForStateAsync(kit.Http, Batch, "done", TimeSpan.FromSeconds(120));
        var frames = await BatchTestKit.FramesAsync(kit.Http, Batch);
        kit.VideoSeq = frames[Video].GetProperty("seq").GetInt32();
        kit.StillSeq = frames[Still].GetProperty("seq").GetInt32();
        return kit;
    }

    public async Task<JsonElement> RecordingAsync() => await BatchTestKit.GetAsync(Http, $"/v1/batches/{Batch}/frames/{VideoSeq}/recording");

    public async Task<JsonElement> VideoLineAsync() =>
        (await BatchTestKit.ManifestAsync(Http, Batch)).Single(l => l.GetProperty("frameId").GetString() == Video);

    public async ValueTask DisposeAsync()
    {
        Http.Dispose();
        await App.StopAsync();
        await App.DisposeAsync();
        try { Directory.Delete(Root, recursive: true); } catch (IOException) { }
    }
}
