using System.Collections.Concurrent;
using System.Net;
using System.Net.Http.Json;
using System.Text;
using System.Text.Json;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Api;

/// <summary>Profiles and models swap while frames are being scored: no request fails, and every report says what scored it.</summary>
public class ReloadUnderTrafficTests
{
    [Fact]
    public async Task Reloads_and_new_profile_versions_during_traffic_fail_no_request_and_every_report_names_model_and_profile()
    {
        await using var s = await TestService.StartAsync(models => Evaluation.EvaluationFixtures.CopyDemoModel(Path.Combine(models, "demo")),
            new Dictionary<string, string?> { ["Service:MaxQueuedFrames"] = "64" });
        var until = DateTime.UtcNow.AddSeconds(60);
        while ((await s.Client.GetAsync("/readyz")).StatusCode != HttpStatusCode.OK) { Assert.True(DateTime.UtcNow < until); await Task.Delay(100); }
        string sha = (await s.Client.GetFromJsonAsync<JsonElement>("/v1/models/demo")).ToString();

        var f = new ApronSceneGenerator(256, 128).Render(21);
        var png = DemoPng.Encode(f);

        var failures = new ConcurrentBag<string>();
        var seen = new ConcurrentBag<(string Sha, string Version)>();
        using var stop = new CancellationTokenSource();
        var clients = Enumerable.Range(0, 3).Select(_ => Task.Run(async () =>
        {
            while (!stop.IsCancellationRequested)
            {
                using var form = new MultipartFormDataContent();
                var part = new ByteArrayContent(png);
                part.Headers.ContentType = new("image/png");
                form.Add(part, "frame", "f.png");
                form.Add(new StringContent("none"), "artifacts");
                var r = await s.Client.PostAsync("/v1/models/demo/frames", form);
                string body = await r.Content.ReadAsStringAsync();
                if (r.StatusCode != HttpStatusCode.OK) { failures.Add($"{(int)r.StatusCode}: {body}"); continue; }
                var model = JsonDocument.Parse(body).RootElement.GetProperty("report").GetProperty("model");
                seen.Add((model.GetProperty("sha256").GetString()!, model.GetProperty("profileVersion").GetString()!));
            }
        })).ToArray();

        var versions = new List<string> { "default" };
        for (int i = 0; i < 4; i++)
        {
            await Task.Delay(150);
            var put = await s.Client.PutAsync("/v1/models/demo/profile",
                new StringContent($$"""
                    { "version": "traffic-{{i}}", "options": { "method": "sml", "energyTemperature": 1, "threshold": {{2 + i}}, "minimumRegionArea": 64,
                      "boundarySuppression": { "enabled": true, "initialWidth": 4, "widthStep": 1, "iterations": 4 },
                      "smoothing": { "enabled": true, "kernelSize": 7, "sigma": 1, "dilation": 6 } } }
                    """, Encoding.UTF8, "application/json"));
            Assert.Equal(HttpStatusCode.OK, put.StatusCode);
            versions.Add($"traffic-{i}");
            Assert.Equal(HttpStatusCode.OK, (await s.Client.PostAsync("/v1/models/reload", null)).StatusCode);
        }
        // Keep the traffic up until the last version has scored a frame (or 20 s pass, and the assertion below says so).
        var deadline = DateTime.UtcNow.AddSeconds(20);
        while (!seen.Any(r => r.Version == "traffic-3") && DateTime.UtcNow < deadline) await Task.Delay(50);
        stop.Cancel();
        await Task.WhenAll(clients);

        Assert.Empty(failures);
        Assert.True(seen.Count >= 4, $"only {seen.Count} frames scored");
        Assert.All(seen, r =>
        {
            Assert.Matches("^[0-9a-f]{64}$", r.Sha);
            Assert.Contains(r.Version, versions);
        });
        Assert.Contains(seen, r => r.Version == "traffic-3");
    }
}
