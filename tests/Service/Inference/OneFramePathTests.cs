using Microsoft.Extensions.DependencyInjection;
using System.Net;
using System.Net.Http.Json;
using System.Text.Json;
using Strayspot.Service.Demo;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Tests.Service.Api;
using Strayspot.Tests.Service.Batches;
using Strayspot.Tests.Service.Evaluation;

namespace Strayspot.Tests.Service.Inference;

/// <summary>
/// HTTP, batch and evaluation frames of one model in one service: one ONNX Runtime session between them, and every
/// frame counted by the drift watch and the metrics.
/// </summary>
/// <remarks>In the process-environment collection: the metrics listener hears every host's meter in the process.</remarks>
[Collection(nameof(Strayspot.Tests.Service.Hosting.ProcessEnvironment))]
public class OneFramePathTests
{
    [Fact]
    public async Task Http_batch_and_evaluation_frames_share_one_session_and_all_feed_drift_and_metrics()
    {
        await using var s = await BatchTestKit.StartAsync();
        var until = DateTime.UtcNow.AddSeconds(60);
        while ((await s.Client.GetAsync("/readyz")).StatusCode != HttpStatusCode.OK) { Assert.True(DateTime.UtcNow < until); await Task.Delay(100); }
        string modelPath = Path.Combine(s.ModelsRoot, BatchTestKit.Model, SegmentationModel.ModelFileName);

        using (var form = new MultipartFormDataContent())
        {
            var part = new ByteArrayContent(DemoPng.Encode(new ApronSceneGenerator(256, 128).Render(5)));
            part.Headers.ContentType = new("image/png");
            form.Add(part, "frame", "f.png");
            form.Add(new StringContent("none"), "artifacts");
            var r = await s.Client.PostAsync("/v1/models/demo/frames", form);
            Assert.Equal(HttpStatusCode.OK, r.StatusCode);
            // HTTP reports carry every stage time, as command-line reports do.
            var timings = (await r.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("report").GetProperty("timingsMs");
            foreach (string stage in new[] { "preprocess", "inference", "reduction", "standardization", "boundarySuppression", "smoothing", "regions", "scoringTotal" })
                Assert.True(timings.TryGetProperty(stage, out _), $"no {stage} in {timings}");
        }
        await BatchTestKit.DoneBatchAsync(s, "cams", "b1", frames: 3);

        EvaluationFixtures.WriteFlatDataset(Path.Combine(s.DataRoot, "labeled"), frames: 2);
        var start = await s.Client.PostAsJsonAsync("/v1/models/demo/evaluations", new { dataset = "labeled" });
        Assert.Equal(HttpStatusCode.Accepted, start.StatusCode);
        string id = (await start.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("id").GetString()!;
        JsonElement job;
        do
        {
            await Task.Delay(100);
            job = await s.Client.GetFromJsonAsync<JsonElement>($"/v1/evaluations/{id}");
            Assert.True(DateTime.UtcNow < until.AddSeconds(60), $"stuck: {job}");
        } while (job.GetProperty("state").GetString() is "queued" or "running");
        Assert.Equal("done", job.GetProperty("state").GetString());

        Assert.Equal(1, SegmentationModel.LiveSessions(modelPath));
        Assert.Equal(1, s.App.Services.GetRequiredService<ModelRegistry>().LiveSessions(BatchTestKit.Model));

        const int frames = 1 + 3 + 2;
        var drift = await s.Client.GetFromJsonAsync<JsonElement>("/v1/models/demo/drift");
        Assert.Equal(frames, drift.GetProperty("frames").GetInt64());

        string text = "";
        long Counted() => text.Split('\n')
            .Where(l => l.StartsWith("strayspot_frames_scored_total{", StringComparison.Ordinal) && l.Contains("model=\"demo\"", StringComparison.Ordinal))
            .Sum(l => long.Parse(l[(l.LastIndexOf(' ') + 1)..], System.Globalization.CultureInfo.InvariantCulture));
        // The exporter caches a scrape briefly; ask until every frame shows.
        for (int i = 0; i < 50 && Counted() != frames; i++)
        {
            await Task.Delay(200);
            text = await s.Client.GetStringAsync("/metrics");
        }
        Assert.Equal(frames, Counted());
        Assert.Contains("method=\"sml+boundary+smoothing\"", text); // the evaluation's frames, by its primary method
    }
}
