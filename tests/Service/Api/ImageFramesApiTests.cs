using System.Net;
using System.Net.Http.Headers;
using System.Security.Cryptography;
using System.Text.Json;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Api;

public class ImageFramesApiTests
{
    private static MultipartFormDataContent Upload(byte[] image, params (string Key, string Value)[] fields)
    {
        var form = new MultipartFormDataContent();
        var part = new ByteArrayContent(image);
        part.Headers.ContentType = new MediaTypeHeaderValue("image/png");
        form.Add(part, "frame", "cam3-000117.png");
        foreach (var (k, v) in fields) form.Add(new StringContent(v), k);
        return form;
    }

    private static async Task WaitReady(TestService s)
    {
        var until = DateTime.UtcNow.AddSeconds(30);
        while ((await s.Client.GetAsync("/readyz")).StatusCode != HttpStatusCode.OK)
        {
            Assert.True(DateTime.UtcNow < until, await (await s.Client.GetAsync("/readyz")).Content.ReadAsStringAsync());
            await Task.Delay(50);
        }
    }

    [Fact]
    public async Task An_image_is_run_through_the_model_and_agrees_with_the_parts_run_by_hand()
    {
        var graph = new TestSegmentationGraph { Classes = 3, Stride = 2 };
        await using var s = await TestService.StartAsync(m => graph.WriteFolder(Path.Combine(m, "tiny")));
        await WaitReady(s);
        using var image = TestImages.Gradient(40, 24);
        byte[] png = TestImages.Png(image);

        var r = await s.Client.PostAsync("/v1/models/tiny/frames", Upload(png, ("method", "maxlogit"), ("threshold", "-0.5"),
            ("minArea", "1"), ("artifacts", "overlay,heat")));
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(r.StatusCode == HttpStatusCode.OK, body);
        var report = JsonDocument.Parse(body).RootElement.GetProperty("report");
        Assert.Equal(40, report.GetProperty("frame").GetProperty("width").GetInt32());
        Assert.Equal(24, report.GetProperty("frame").GetProperty("height").GetInt32());
        string sha = Convert.ToHexStringLower(SHA256.HashData(File.ReadAllBytes(Path.Combine(s.ModelsRoot, "tiny", "model.onnx"))));
        Assert.Equal(sha, report.GetProperty("model").GetProperty("sha256").GetString());

        // The same frame through the model runtime, preprocessor and pipeline directly.
        using var model = SegmentationModel.LoadFolder(Path.Combine(s.ModelsRoot, "tiny"), new ModelRuntimeOptions { IntraOpThreads = 1 });
        using var frame = new FrameDecoder().Decode(new MemoryStream(png));
        var input = new FramePreprocessor(model.Descriptor.Input).Prepare(frame);
        using var lease = model.Run(input);
        float[]? scratch = null;
        var options = new ScoringOptions { Method = ScoreMethod.MaxLogit, Threshold = -0.5f, MinimumRegionArea = 1 };
        var direct = new FramePipeline(options, null).Score(input.Box.CropToContent(lease.View, ref scratch), frame.Height, frame.Width);
        Assert.Equal(direct.FlaggedPixels, report.GetProperty("flaggedPixels").GetInt64());
        Assert.Equal(direct.FrameScore, report.GetProperty("frameScore").GetSingle());

        var overlay = await s.Client.GetAsync(report.GetProperty("artifacts").GetProperty("overlay").GetString());
        Assert.Equal(HttpStatusCode.OK, overlay.StatusCode);
        Assert.Equal("image/png", overlay.Content.Headers.ContentType?.MediaType);
    }

    [Fact]
    public async Task Bytes_that_are_no_image_are_refused_with_the_runtime_code()
    {
        var graph = new TestSegmentationGraph { Classes = 3 };
        await using var s = await TestService.StartAsync(m => graph.WriteFolder(Path.Combine(m, "tiny")));
        await WaitReady(s);
        var r = await s.Client.PostAsync("/v1/models/tiny/frames", Upload("definitely not a picture"u8.ToArray(), ("method", "msp")));
        string body = await r.Content.ReadAsStringAsync();
        Assert.InRange((int)r.StatusCode, 400, 499);
        string code = JsonDocument.Parse(body).RootElement.GetProperty("code").GetString()!;
        Assert.Contains(code, new[] { Strayspot.Service.Frames.FrameErrorCodes.Format, Strayspot.Service.Frames.FrameErrorCodes.Corrupt });
    }

    [Fact]
    public async Task A_logits_only_model_sends_images_elsewhere()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        using var image = TestImages.Gradient(8, 8);
        var p = await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/frames", Upload(TestImages.Png(image))), 503, "model-unavailable");
        Assert.Contains("/logits", p.GetProperty("detail").GetString());
    }
}

public class CalibrationBindingTests
{
    [Fact]
    public async Task A_calibration_made_with_other_weights_makes_the_model_unusable()
    {
        var graph = new TestSegmentationGraph { Classes = 3 };
        await using var s = await TestService.StartAsync(m =>
        {
            string folder = graph.WriteFolder(Path.Combine(m, "tiny"));
            File.WriteAllText(Path.Combine(folder, "calibration.json"), JsonSerializer.Serialize(new
            {
                classes = Enumerable.Range(0, 3).Select(i => new { name = "c" + i, count = 500, mean = 1.0, std = 0.5 }).ToArray(),
                minimumCount = 100,
                modelSha256 = new string('0', 64),
                frameCount = 12,
            }));
        });
        var json = JsonDocument.Parse(await s.Client.GetStringAsync("/v1/models/tiny")).RootElement;
        Assert.False(json.GetProperty("usable").GetBoolean());
        Assert.Contains("calibrate again", json.GetProperty("error").GetString());
        await TestService.ProblemAsync(await s.Client.GetAsync("/readyz"), 503, "not-ready");
    }
}
