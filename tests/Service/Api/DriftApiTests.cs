using System.Net;
using System.Net.Http.Json;
using System.Text.Json;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Api;

/// <summary>The drift watch end to end: demo frames as calibrated (same size and light) stay quiet, a darkened fleet raises the warning.</summary>
public class DriftApiTests(Xunit.Abstractions.ITestOutputHelper output)
{
    private static byte[] Png(int seed, double brightness)
    {
        var f = new ApronSceneGenerator(1024, 512).Render(seed);
        for (int i = 0; i < f.Rgb.Length; i++) f.Rgb[i] = (byte)Math.Clamp(f.Rgb[i] * brightness, 0, 255);
        return DemoPng.Encode(f);
    }

    private static async Task Post(HttpClient client, byte[] png)
    {
        using var form = new MultipartFormDataContent();
        var part = new ByteArrayContent(png);
        part.Headers.ContentType = new("image/png");
        form.Add(part, "frame", "f.png");
        form.Add(new StringContent("none"), "artifacts");
        var r = await client.PostAsync("/v1/models/demo/frames", form);
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
    }

    [Fact]
    public async Task Ordinary_frames_stay_quiet_and_night_frames_raise_the_warning()
    {
        await using var s = await TestService.StartAsync(
            models => Evaluation.EvaluationFixtures.CopyDemoModel(Path.Combine(models, "demo")),
            new Dictionary<string, string?> { ["Service:DriftHalfLifeFrames"] = "4" });
        var until = DateTime.UtcNow.AddSeconds(60);
        while ((await s.Client.GetAsync("/readyz")).StatusCode != HttpStatusCode.OK) { Assert.True(DateTime.UtcNow < until); await Task.Delay(100); }

        for (int i = 0; i < 6; i++) await Post(s.Client, Png(500 + i, 1.0));
        var quiet = await s.Client.GetFromJsonAsync<JsonElement>("/v1/models/demo/drift");
        output.WriteLine($"ordinary: {quiet.GetProperty("overall").GetDouble():0.000}");
        Assert.False(quiet.GetProperty("warning").GetBoolean());

        for (int i = 0; i < 12; i++) await Post(s.Client, Png(600 + i, 0.3));
        var night = await s.Client.GetFromJsonAsync<JsonElement>("/v1/models/demo/drift");
        output.WriteLine($"night: {night.GetProperty("overall").GetDouble():0.000}");
        Assert.True(night.GetProperty("warning").GetBoolean(), night.ToString());
        Assert.True(night.GetProperty("overall").GetDouble() > quiet.GetProperty("overall").GetDouble());
    }

    [Fact]
    public async Task A_model_without_calibration_has_no_drift_to_report()
    {
        await using var s = await TestService.StartAsync(models => TestService.WriteModel(models, "plain", statistics: false));
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/models/plain/drift"), 422, "statistics-missing");
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/models/none/drift"), 404, "model-not-found");
    }
}
