using System.Net;
using System.Net.Http.Headers;
using System.Text;
using System.Text.Json;
using Microsoft.Extensions.DependencyInjection;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Api;

public class LogitsApiTests
{
    private const int C = 4, H = 16, W = 24;

    /// <summary>
    /// Class 0 wins everywhere with logit 10 except a 6×6 patch at x 8..13, y 4..9 where all logits are 0.
    /// With the test statistics (class 0: mean 5, std 1) SML is +5 outside and −5 inside: scores −5 and +5.
    /// </summary>
    private static float[] ApronLogits()
    {
        var data = new float[C * H * W];
        for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
        {
            bool patch = x is >= 8 and < 14 && y is >= 4 and < 10;
            data[y * W + x] = patch ? 0f : 10f;
        }
        return data;
    }

    private static byte[] NpyBytes(float[] data, int[] shape)
    {
        using var ms = new MemoryStream();
        Npy.WriteFloat32(ms, data, shape);
        return ms.ToArray();
    }

    private static MultipartFormDataContent Upload(byte[]? npy, params (string Key, string Value)[] fields)
    {
        var form = new MultipartFormDataContent();
        if (npy is not null)
        {
            var part = new ByteArrayContent(npy);
            part.Headers.ContentType = new MediaTypeHeaderValue("application/octet-stream");
            form.Add(part, "logits", "frame-0001.npy");
        }
        foreach (var (k, v) in fields) form.Add(new StringContent(v), k);
        return form;
    }

    private static (string, string)[] Plain => [("smoothing", "off"), ("boundarySuppression", "off"), ("minArea", "1")];

    [Fact]
    public async Task Logits_are_scored_into_a_report_with_artifact_links_that_serve_pngs()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var r = await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(NpyBytes(ApronLogits(), [C, H, W]),
            [.. Plain, ("clientFrameId", "cam3-000117"), ("rigId", "rig-7"), ("captureTime", "2026-12-01T08:30:00Z")]));
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(r.StatusCode == HttpStatusCode.OK, body);
        var json = JsonDocument.Parse(body).RootElement;
        Assert.Equal("cam3-000117", json.GetProperty("client").GetProperty("clientFrameId").GetString());
        Assert.Equal("rig-7", json.GetProperty("client").GetProperty("rigId").GetString());
        string frameId = json.GetProperty("frameId").GetString()!;
        var report = json.GetProperty("report");
        Assert.Equal(frameId, report.GetProperty("frameId").GetString());
        Assert.Equal("apron-a", report.GetProperty("model").GetProperty("name").GetString());
        Assert.Equal("default", report.GetProperty("model").GetProperty("profileVersion").GetString());
        Assert.Equal(W, report.GetProperty("frame").GetProperty("width").GetInt32());
        Assert.Equal(36, report.GetProperty("flaggedPixels").GetInt64()); // the 6×6 patch, worked out by hand above
        var region = Assert.Single(report.GetProperty("regions").EnumerateArray());
        var box = region.GetProperty("box");
        Assert.Equal((8, 4, 6, 6), (box.GetProperty("x").GetInt32(), box.GetProperty("y").GetInt32(),
            box.GetProperty("width").GetInt32(), box.GetProperty("height").GetInt32()));
        Assert.Equal(5.0, region.GetProperty("maxScore").GetDouble(), 4);
        Assert.Equal("tarmac", region.GetProperty("classBeneathName").GetString());

        var links = report.GetProperty("artifacts").EnumerateObject().ToDictionary(p => p.Name, p => p.Value.GetString()!);
        Assert.Equal(["classes", "heat", "mask"], links.Keys.Order().ToArray());
        foreach (var link in links.Values)
        {
            var a = await s.Client.GetAsync(link);
            Assert.Equal(HttpStatusCode.OK, a.StatusCode);
            byte[] png = await a.Content.ReadAsByteArrayAsync();
            Assert.Equal(new byte[] { 0x89, 0x50, 0x4E, 0x47 }, png[..4]); // PNG signature (PNG specification, section 5.2)
        }
        await TestService.ProblemAsync(await s.Client.GetAsync($"/v1/frames/{frameId}/score"), 404, "artifact-not-found");
    }

    [Fact]
    public async Task Inline_answer_is_one_multipart_with_the_report_and_a_16_bit_score_png_scaled_by_its_range()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var r = await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(NpyBytes(ApronLogits(), [C, H, W]),
            [.. Plain, ("artifacts", "score,score16"), ("response", "inline")]));
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        Assert.Equal("multipart/mixed", r.Content.Headers.ContentType?.MediaType);
        string boundary = r.Content.Headers.ContentType!.Parameters.Single(p => p.Name == "boundary").Value!.Trim('"');
        var reader = new Microsoft.AspNetCore.WebUtilities.MultipartReader(boundary, await r.Content.ReadAsStreamAsync());
        var parts = new List<(string? Type, string? Disposition, byte[] Body)>();
        while (await reader.ReadNextSectionAsync() is { } section)
        {
            using var ms = new MemoryStream();
            await section.Body.CopyToAsync(ms);
            parts.Add((section.ContentType, section.ContentDisposition, ms.ToArray()));
        }
        Assert.Equal(3, parts.Count);
        Assert.Equal("application/json", parts[0].Type);
        using var answer = JsonDocument.Parse(parts[0].Body);
        var range = answer.RootElement.GetProperty("report").GetProperty("scoreRange");
        float min = range.GetProperty("min").GetSingle(), max = range.GetProperty("max").GetSingle();
        Assert.Equal((-5f, 5f), (min, max));

        var score = Npy.ReadFloat32(new MemoryStream(parts.Single(p => p.Disposition?.Contains("score.npy") == true).Body));
        using var png = SixLabors.ImageSharp.Image.Load<SixLabors.ImageSharp.PixelFormats.L16>(parts.Single(p => p.Disposition?.Contains("score16.png") == true).Body);
        Assert.Equal((W, H), (png.Width, png.Height));
        var values = new SixLabors.ImageSharp.PixelFormats.L16[W * H];
        png.CopyPixelDataTo(values);
        float step = (max - min) / 65535f;
        for (int i = 0; i < values.Length; i++)
            Assert.InRange(min + values[i].PackedValue * step, score.Data[i] - step, score.Data[i] + step);
    }

    [Fact]
    public async Task An_unknown_response_kind_is_a_validation_problem()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var r = await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(NpyBytes(ApronLogits(), [C, H, W]), [.. Plain, ("response", "zip")]));
        await TestService.ProblemAsync(r, 400, "validation-failed");
    }

    [Fact]
    public async Task The_endpoint_agrees_with_the_pipeline_run_directly()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var r = await s.Client.PostAsync("/v1/models/apron-a/logits",
            Upload(NpyBytes(ApronLogits(), [1, C, H, W]), ("frameWidth", "48"), ("frameHeight", "32"), ("artifacts", "score")));
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(r.StatusCode == HttpStatusCode.OK, body);
        var report = JsonDocument.Parse(body).RootElement.GetProperty("report");

        var stats = ClassStatistics.Load(Path.Combine(s.ModelsRoot, "apron-a", "statistics.json"));
        var direct = new FramePipeline(new ScoringOptions(), stats).Score(LogitsView.FromShape(ApronLogits(), [C, H, W]), 32, 48);
        Assert.Equal(48, report.GetProperty("frame").GetProperty("width").GetInt32());
        Assert.Equal(direct.FlaggedPixels, report.GetProperty("flaggedPixels").GetInt64());
        Assert.Equal(direct.FrameScore, report.GetProperty("frameScore").GetSingle());
        Assert.Equal(direct.Regions.Regions.Count, report.GetProperty("regions").GetArrayLength());

        var npy = await s.Client.GetByteArrayAsync(report.GetProperty("artifacts").GetProperty("score").GetString());
        var scores = Npy.ReadFloat32(new MemoryStream(npy));
        Assert.Equal([32, 48], scores.Shape);
        Assert.Equal(direct.AnomalyScore.ToArray(), scores.Data);
    }

    [Fact]
    public async Task Form_fields_override_the_profile_and_need_no_statistics_for_other_methods()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "bare", statistics: false));
        var sml = await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/bare/logits",
            Upload(NpyBytes(ApronLogits(), [C, H, W]))), 422, "statistics-missing");
        Assert.Contains("bare", sml.GetProperty("detail").GetString());

        // Max logit: −10 outside, 0 inside the patch; threshold −5 flags the patch only.
        var r = await s.Client.PostAsync("/v1/models/bare/logits", Upload(NpyBytes(ApronLogits(), [C, H, W]),
            [.. Plain, ("method", "maxlogit"), ("threshold", "-5"), ("artifacts", "none")]));
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(r.StatusCode == HttpStatusCode.OK, body);
        var report = JsonDocument.Parse(body).RootElement.GetProperty("report");
        Assert.Equal("maxlogit", report.GetProperty("method").GetString());
        Assert.Equal(-5, report.GetProperty("threshold").GetSingle());
        Assert.Equal(36, report.GetProperty("flaggedPixels").GetInt64());
        Assert.Empty(report.GetProperty("artifacts").EnumerateObject());
    }

    [Fact]
    public async Task Unknown_model_is_404_and_wrong_content_type_is_415()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/nope/logits", Upload(NpyBytes(ApronLogits(), [C, H, W]))), 404, "model-not-found");
        var p = await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits",
            new StringContent("{}", Encoding.UTF8, "application/json")), 415, "unsupported-media-type");
        Assert.Contains("application/json", p.GetProperty("detail").GetString()); // names what was refused
    }

    [Fact]
    public async Task A_form_without_the_logits_part_and_an_empty_body_are_400()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var p = await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(null, ("rigId", "r1"))), 400, "validation-failed");
        Assert.Contains("'logits'", p.GetProperty("detail").GetString());

        var empty = new ByteArrayContent([]);
        empty.Headers.ContentType = MediaTypeHeaderValue.Parse("multipart/form-data; boundary=strayspot");
        var e = await s.Client.PostAsync("/v1/models/apron-a/logits", empty);
        Assert.Equal(HttpStatusCode.BadRequest, e.StatusCode);
        Assert.Equal("application/problem+json", e.Content.Headers.ContentType?.MediaType);

        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits", Upload([])), 400, "npy-format");
    }

    public static TheoryData<string, byte[]> BadNpy()
    {
        var good = NpyBytes(ApronLogits(), [C, H, W]);
        var wrongMagic = (byte[])good.Clone();
        wrongMagic[1] = (byte)'X';
        var int32 = Encoding.ASCII.GetBytes(Encoding.ASCII.GetString(good).Replace("'<f4'", "'<i4'"));
        var truncated = good[..(good.Length - 40)];
        return new TheoryData<string, byte[]>
        {
            { "npy-format", Encoding.ASCII.GetBytes("this is not an npy file at all") },
            { "npy-format", wrongMagic },
            { "npy-format", int32 },
            { "npy-format", truncated },
            { "logits-shape", NpyBytes(new float[H * W], [H, W]) },
            { "logits-shape", NpyBytes(new float[2 * C * H * W], [2, C, H, W]) },
        };
    }

    [Theory]
    [MemberData(nameof(BadNpy))]
    public async Task Bad_npy_header_dtype_or_shape_is_400_with_its_code(string code, byte[] npy)
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(npy)), 400, code);
    }

    [Fact]
    public async Task NaN_logits_are_400_logits_non_finite()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var data = ApronLogits();
        data[C * H * W - 5] = float.NaN;
        var p = await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(NpyBytes(data, [C, H, W]))), 400, "logits-non-finite");
        Assert.False(string.IsNullOrEmpty(p.GetProperty("detail").GetString()));
    }

    [Fact]
    public async Task Logits_with_another_class_count_are_422_naming_both_numbers()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var p = await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits",
            Upload(NpyBytes(new float[3 * H * W], [3, H, W]))), 422, "model-class-mismatch");
        Assert.Equal(3, p.GetProperty("logitsClasses").GetInt32());
        Assert.Equal(4, p.GetProperty("modelClasses").GetInt32());
    }

    [Theory]
    [InlineData("method", "softmax")]
    [InlineData("threshold", "Infinity")]
    [InlineData("minArea", "-4")]
    [InlineData("smoothing", "sometimes")]
    [InlineData("frameWidth", "0")]
    [InlineData("artifacts", "overlay")]
    [InlineData("captureTime", "soon")]
    [InlineData("colour", "red")]
    public async Task Bad_option_values_are_400_validation_failed_naming_the_field(string field, string value)
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var p = await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits",
            Upload(NpyBytes(ApronLogits(), [C, H, W]), (field, value), ("frameHeight", "16"))), 400, "validation-failed");
        Assert.True(p.GetProperty("errors").TryGetProperty(field, out _), p.ToString());
    }

    [Fact]
    public async Task An_oversized_upload_is_413()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"),
            new Dictionary<string, string?> { ["Service:MaxRequestBytes"] = "2048" });
        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits",
            Upload(NpyBytes(ApronLogits(), [C, H, W]))), 413, "payload-too-large");
    }

    [Fact]
    public async Task A_full_queue_is_429_with_Retry_After()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"), new Dictionary<string, string?>
        {
            ["Service:MaxConcurrentFrames"] = "1",
            ["Service:MaxQueuedFrames"] = "0",
        });
        var gate = s.App.Services.GetRequiredService<FrameGate>();
        using (var busy = await gate.TryEnterAsync(CancellationToken.None)) // a slow frame holds the only slot
        {
            var r = await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(NpyBytes(ApronLogits(), [C, H, W])));
            await TestService.ProblemAsync(r, 429, "queue-full");
            Assert.NotNull(r.Headers.RetryAfter?.Delta);
            Assert.True(r.Headers.RetryAfter!.Delta >= TimeSpan.FromSeconds(1));
        }
        var ok = await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(NpyBytes(ApronLogits(), [C, H, W])));
        Assert.Equal(HttpStatusCode.OK, ok.StatusCode);
    }

    [Fact]
    public async Task Many_concurrent_frames_on_one_slot_are_either_scored_or_refused_with_429()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"), new Dictionary<string, string?>
        {
            ["Service:MaxConcurrentFrames"] = "1",
            ["Service:MaxQueuedFrames"] = "1",
        });
        var npy = NpyBytes(ApronLogits(), [C, H, W]);
        var gate = s.App.Services.GetRequiredService<FrameGate>();
        var busy = await gate.TryEnterAsync(CancellationToken.None);
        var first = s.Client.PostAsync("/v1/models/apron-a/logits", Upload(npy, ("artifacts", "none")));
        while (gate.Queued == 0) await Task.Delay(5); // the first request waits in the only queue place
        var rest = await Task.WhenAll(Enumerable.Range(0, 6).Select(_ => s.Client.PostAsync("/v1/models/apron-a/logits", Upload(npy, ("artifacts", "none")))));
        Assert.All(rest, r => Assert.Equal(HttpStatusCode.TooManyRequests, r.StatusCode));
        busy!.Dispose();
        Assert.Equal(HttpStatusCode.OK, (await first).StatusCode);
    }

    [Fact]
    public async Task Waiting_past_the_request_timeout_is_503_timeout()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"), new Dictionary<string, string?>
        {
            ["Service:MaxConcurrentFrames"] = "1",
            ["Service:MaxQueuedFrames"] = "2",
            ["Service:RequestTimeout"] = "00:00:00.300",
        });
        var gate = s.App.Services.GetRequiredService<FrameGate>();
        using var busy = await gate.TryEnterAsync(CancellationToken.None);
        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(NpyBytes(ApronLogits(), [C, H, W]))), 503, "timeout");
    }

    [Fact]
    public async Task Each_frame_is_logged_with_model_size_and_stage_times_but_no_data()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var r = await s.Client.PostAsync("/v1/models/apron-a/logits", Upload(NpyBytes(ApronLogits(), [C, H, W]), ("clientFrameId", "cam3-000117")));
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        var e = Assert.Single(s.Log.Events, e => e.Properties.ContainsKey("ReductionMs"));
        Assert.Equal("\"apron-a\"", e.Properties["Model"].ToString());
        Assert.Equal("24", e.Properties["FrameWidth"].ToString());
        foreach (var stage in new[] { "StandardizationMs", "BoundaryMs", "SmoothingMs", "RegionsMs", "TotalMs" })
            Assert.True(e.Properties.ContainsKey(stage), stage);
        Assert.DoesNotContain("NUMPY", s.Log.AllText());
    }
}
