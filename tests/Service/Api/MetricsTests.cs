using System.Net;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Api;

/// <summary>The Prometheus scrape after known traffic: our counters, stage histograms, drift gauge and ASP.NET Core's own.</summary>
/// <remarks>
/// Alone, because a meter provider listens to every meter of its name in the process: another test's host scoring
/// frames at the same time would show up in this scrape.
/// </remarks>
[Collection(nameof(Strayspot.Tests.Service.Hosting.ProcessEnvironment))]
public class MetricsTests
{
    [Fact]
    public async Task Scrape_after_two_frames_counts_them_and_times_every_stage()
    {
        await using var s = await TestService.StartAsync(models => Evaluation.EvaluationFixtures.CopyDemoModel(Path.Combine(models, "demo")));
        var until = DateTime.UtcNow.AddSeconds(60);
        while ((await s.Client.GetAsync("/readyz")).StatusCode != HttpStatusCode.OK) { Assert.True(DateTime.UtcNow < until); await Task.Delay(100); }
        var f = new ApronSceneGenerator(256, 128).Render(9);
        var png = DemoPng.Encode(f);
        for (int i = 0; i < 2; i++)
        {
            using var form = new MultipartFormDataContent();
            var part = new ByteArrayContent(png);
            part.Headers.ContentType = new("image/png");
            form.Add(part, "frame", "f.png");
            form.Add(new StringContent("mask"), "artifacts");
            Assert.Equal(HttpStatusCode.OK, (await s.Client.PostAsync("/v1/models/demo/frames", form)).StatusCode);
        }

        string text = "";
        static string? Line(string text, string name, string label) =>
            text.Split('\n').FirstOrDefault(l => l.StartsWith(name + "{", StringComparison.Ordinal) && l.Contains(label, StringComparison.Ordinal));
        // The exporter caches a scrape briefly; ask until both frames show.
        for (int i = 0; i < 50 && Line(text, "strayspot_frames_scored_total", "model=\"demo\"")?.EndsWith(" 2") != true; i++)
        {
            await Task.Delay(200);
            text = await s.Client.GetStringAsync("/metrics");
        }
        Assert.EndsWith(" 2", Line(text, "strayspot_frames_scored_total", "method=\"sml\",model=\"demo\""));
        foreach (string stage in new[] { "decode", "preprocess", "inference", "scoring", "encode" })
            Assert.EndsWith(" 2", Line(text, "strayspot_stage_duration_seconds_count", $"stage=\"{stage}\""));
        Assert.NotNull(Line(text, "strayspot_drift_overall", "model=\"demo\""));
        Assert.Contains("strayspot_queue_waiting", text);
        Assert.NotNull(Line(text, "strayspot_batch_frames", "state=\"pending\""));
        Assert.Contains("http_server_request_duration_seconds", text);
    }
}
