using System.Net;
using System.Net.Http.Headers;
using System.Net.Http.Json;
using System.Text.Json;
using Microsoft.Extensions.DependencyInjection;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Batches;
using Strayspot.Service.Models;
using Strayspot.Service.Reports;
using Strayspot.Tests.Service.Setup;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Api;

/// <summary>
/// One service on a real Kestrel with models set up right and wrong: <c>tiny</c> is calibrated on 24×16 frames;
/// <c>raw</c> has no calibration (its profile's method is sml); <c>soft</c> outputs probabilities and its profile
/// says maxlogit; <c>stale</c> was calibrated before its descriptor's mean changed.
/// </summary>
public sealed class SetupGuardsService : IAsyncLifetime
{
    public const int CalibratedWidth = 24, CalibratedHeight = 16, Classes = 3;

    public KestrelService Service { get; private set; } = null!;

    public async Task InitializeAsync()
    {
        using var calibrated = new SetupFolder(new TestSegmentationGraph { Classes = Classes }, width: CalibratedWidth, height: CalibratedHeight);
        calibrated.Calibrate();
        Service = await KestrelService.StartAsync(m =>
        {
            CopyFolder(calibrated.Model, Path.Combine(m, "tiny"));
            new TestSegmentationGraph { Classes = Classes }.WriteFolder(Path.Combine(m, "raw"));
            string soft = new TestSegmentationGraph { Classes = Classes, Softmax = true }.WriteFolder(Path.Combine(m, "soft"));
            File.WriteAllText(Path.Combine(soft, "profile.json"), """{"method":"maxlogit","threshold":0}""");
            string stale = Path.Combine(m, "stale");
            CopyFolder(calibrated.Model, stale);
            var d = ModelDescriptor.Load(Path.Combine(stale, ModelDescriptor.FileName));
            (d with { Input = d.Input with { Mean = [0.4f, 0.4f, 0.4f] } }).Save(Path.Combine(stale, ModelDescriptor.FileName));
        }, unusable: ["stale"]);
    }

    public async Task DisposeAsync() => await Service.DisposeAsync();

    public static void CopyFolder(string from, string to)
    {
        Directory.CreateDirectory(to);
        foreach (string f in Directory.GetFiles(from)) File.Copy(f, Path.Combine(to, Path.GetFileName(f)));
    }
}

/// <summary>The set-up guards of the command line hold over HTTP too: frame reports carry the same warnings.</summary>
public class SetupGuardsApiTests(SetupGuardsService fixture) : IClassFixture<SetupGuardsService>
{
    private HttpClient Client => fixture.Service.Client;

    public static MultipartFormDataContent Form(string part, byte[] file, params (string Key, string Value)[] fields)
    {
        var form = new MultipartFormDataContent();
        var content = new ByteArrayContent(file);
        content.Headers.ContentType = new MediaTypeHeaderValue("application/octet-stream");
        form.Add(content, part, part + ".bin");
        foreach (var (k, v) in fields) form.Add(new StringContent(v), k);
        return form;
    }

    public static byte[] Png(int width, int height)
    {
        using var image = TestImages.Noise(width, height, seed: 9);
        return TestImages.Png(image);
    }

    public static byte[] Npy(int classes, int height, int width)
    {
        var data = new float[classes * height * width];
        for (int i = 0; i < data.Length; i++) data[i] = (i * 7919 % 13) * 0.5f;
        using var ms = new MemoryStream();
        global::Strayspot.Scoring.Logits.Npy.WriteFloat32(ms, data, [classes, height, width]);
        return ms.ToArray();
    }

    private static async Task<JsonElement> ReportAsync(HttpResponseMessage r)
    {
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(r.StatusCode == HttpStatusCode.OK, $"{(int)r.StatusCode}: {body}");
        return JsonDocument.Parse(body).RootElement.GetProperty("report");
    }

    private static List<string> Codes(JsonElement report) =>
        report.GetProperty("warnings").EnumerateArray().Select(w => w.GetProperty("code").GetString()!).ToList();

    [Fact]
    public async Task An_image_frame_at_the_calibrated_size_has_no_warning_and_one_three_times_wider_is_warned()
    {
        var same = await ReportAsync(await Client.PostAsync("/v1/models/tiny/frames", Form("frame", Png(30, 20), ("artifacts", "none"))));
        Assert.Empty(Codes(same));
        var wide = await ReportAsync(await Client.PostAsync("/v1/models/tiny/frames", Form("frame", Png(72, 48), ("artifacts", "none"))));
        Assert.Equal([ScoringWarnings.FrameSizeDiffers], Codes(wide));
        Assert.Contains("24×16", wide.GetProperty("warnings")[0].GetProperty("message").GetString());
    }

    [Fact]
    public async Task Logits_for_a_frame_far_from_the_calibrated_size_are_warned_and_an_off_scale_threshold_too()
    {
        var wide = await ReportAsync(await Client.PostAsync("/v1/models/tiny/logits",
            Form("logits", Npy(3, 16, 24), ("frameWidth", "72"), ("frameHeight", "48"), ("artifacts", "none"))));
        Assert.Equal([ScoringWarnings.FrameSizeDiffers], Codes(wide));
        var msp = await ReportAsync(await Client.PostAsync("/v1/models/tiny/logits",
            Form("logits", Npy(3, 16, 24), ("method", "msp"), ("threshold", "2"), ("artifacts", "none"))));
        Assert.Equal([ScoringWarnings.ThresholdOutOfRange], Codes(msp));
    }

    [Fact]
    public async Task A_batch_frame_report_carries_the_warnings()
    {
        string folder = Path.Combine(fixture.Service.DataRoot, "wide");
        Directory.CreateDirectory(folder);
        File.WriteAllBytes(Path.Combine(folder, "a.png"), Png(72, 48));
        var r = await Client.PostAsJsonAsync("/v1/batches", new { model = "tiny", folder = "wide", batchId = "wide-1" });
        Assert.True(r.StatusCode == HttpStatusCode.Created, await r.Content.ReadAsStringAsync());
        var line = await Batches.BatchTestKit.WaitManifestLineAsync(Client, "wide-1");
        string report = Path.Combine(fixture.Service.DataRoot, "batches", "wide-1", line.GetProperty("artifacts").GetProperty("report").GetString()!);
        var json = JsonDocument.Parse(File.ReadAllText(report)).RootElement;
        Assert.Equal([ScoringWarnings.FrameSizeDiffers], Codes(json));
    }

    [Fact]
    public async Task Logits_with_height_and_width_swapped_are_refused_unless_stretch_is_on()
    {
        // 16 high × 24 wide logits onto a frame 32 wide × 48 high: the shapes of score-logits' check.
        var refused = await Client.PostAsync("/v1/models/tiny/logits",
            Form("logits", Npy(3, 16, 24), ("frameWidth", "32"), ("frameHeight", "48"), ("artifacts", "none")));
        var problem = await TestService.ProblemAsync(refused, 400, ScoringErrorCodes.LogitsAspect);
        Assert.Contains("swapped", problem.GetProperty("detail").GetString());
        Assert.Contains("stretch=on", problem.GetProperty("detail").GetString());
        await ReportAsync(await Client.PostAsync("/v1/models/tiny/logits",
            Form("logits", Npy(3, 16, 24), ("frameWidth", "32"), ("frameHeight", "48"), ("stretch", "on"), ("artifacts", "none"))));
        await ReportAsync(await Client.PostAsync("/v1/models/tiny/logits",
            Form("logits", Npy(3, 16, 24), ("frameWidth", "48"), ("frameHeight", "32"), ("artifacts", "none"))));
    }

    [Theory]
    [InlineData("raw", 422, ModelErrorCodes.StatisticsMissing)]
    [InlineData("soft", 422, ModelErrorCodes.MethodNeedsLogits)]
    [InlineData("stale", 422, ModelErrorCodes.CalibrationModelMismatch)]
    public async Task A_batch_on_a_model_that_cannot_score_is_refused_when_made_and_nothing_is_stored(string model, int status, string code)
    {
        string folder = Path.Combine(fixture.Service.DataRoot, "ok-" + model);
        Directory.CreateDirectory(folder);
        File.WriteAllBytes(Path.Combine(folder, "a.png"), Png(24, 16));
        string id = "refused-" + model;
        await TestService.ProblemAsync(await Client.PostAsJsonAsync("/v1/batches", new { model, folder = "ok-" + model, batchId = id }), status, code);
        var upload = new MultipartFormDataContent { { new StringContent(model), "model" }, { new StringContent(id), "batchId" } };
        var archive = new ByteArrayContent(HostileInputTests.Zip(("a.png", Png(24, 16))));
        archive.Headers.ContentType = new MediaTypeHeaderValue("application/zip");
        upload.Add(archive, "file", "frames.zip");
        await TestService.ProblemAsync(await Client.PostAsync("/v1/batches", upload), status, code);
        await TestService.ProblemAsync(await Client.GetAsync("/v1/batches/" + id), 404, "batch-not-found");
        Assert.False(Directory.Exists(Path.Combine(fixture.Service.DataRoot, "batches", id)));
    }

    [Fact]
    public async Task A_stored_batch_whose_model_cannot_score_fails_once_with_the_code_and_its_frames_stay_unscored()
    {
        // As when the model changed after the batch was made, or another replica stored it: straight into the store.
        var batches = fixture.Service.App.Services.GetRequiredService<BatchService>();
        batches.Store.Submit("stored-raw", "raw", "folder:x", null, [new NewFrame("a.png", "x/a.png"), new NewFrame("b.png", "x/b.png")]);
        batches.Wake();
        var failed = await Batches.BatchTestKit.WaitForStateAsync(Client, "stored-raw", "failed");
        Assert.StartsWith(ModelErrorCodes.StatisticsMissing + ":", failed.GetProperty("error").GetString());
        Assert.Equal(0, failed.GetProperty("frames").GetProperty("failed").GetInt32());
        Assert.DoesNotContain(fixture.Service.Root, failed.GetProperty("error").GetString());
    }

    [Theory]
    [InlineData("raw", ModelErrorCodes.StatisticsMissing, "POST /v1/models/raw/calibrations")]
    [InlineData("soft", ModelErrorCodes.MethodNeedsLogits, "msp")]
    public async Task Frames_and_logits_on_a_model_that_cannot_score_get_the_batches_refusal_without_server_paths(string model, string code, string named)
    {
        // One readiness rule for every path: the logits endpoint used to let a probabilities model run maxlogit.
        foreach (var response in new[]
        {
            await Client.PostAsync($"/v1/models/{model}/frames", Form("frame", Png(24, 16))),
            await Client.PostAsync($"/v1/models/{model}/logits", Form("logits", Npy(3, 16, 24))),
        })
        {
            var problem = await TestService.ProblemAsync(response, 422, code);
            string detail = problem.GetProperty("detail").GetString()!;
            Assert.Contains(named, detail);
            Assert.DoesNotContain(fixture.Service.Root, detail);
        }
    }

    [Fact]
    public async Task Frames_and_logits_for_a_model_with_a_stale_calibration_get_its_code_not_a_503()
    {
        var frame = await Client.PostAsync("/v1/models/stale/frames", Form("frame", Png(24, 16)));
        var problem = await TestService.ProblemAsync(frame, 422, ModelErrorCodes.CalibrationModelMismatch);
        Assert.Contains("input.mean", problem.GetProperty("detail").GetString());
        await TestService.ProblemAsync(await Client.PostAsync("/v1/models/stale/logits", Form("logits", Npy(3, 16, 24))), 422,
            ModelErrorCodes.CalibrationModelMismatch);
    }
}
