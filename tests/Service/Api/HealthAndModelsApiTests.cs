using System.Net;
using System.Text.Json;

namespace Strayspot.Tests.Service.Api;

public class HealthAndModelsApiTests
{
    [Fact]
    public async Task Healthz_is_alive_even_without_models()
    {
        await using var s = await TestService.StartAsync();
        var r = await s.Client.GetAsync("/healthz");
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        Assert.Equal("alive", JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement.GetProperty("status").GetString());
    }

    [Fact]
    public async Task Readyz_is_503_not_ready_without_models_and_200_with_one()
    {
        await using (var empty = await TestService.StartAsync())
        {
            var p = await TestService.ProblemAsync(await empty.Client.GetAsync("/readyz"), 503, "not-ready");
            Assert.Contains("No model is installed", p.GetProperty("detail").GetString());
        }
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var r = await s.Client.GetAsync("/readyz");
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        var json = JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement;
        Assert.Equal("apron-a", json.GetProperty("models")[0].GetString());
    }

    [Fact]
    public async Task Readyz_names_a_model_whose_statistics_do_not_fit_its_descriptor()
    {
        await using var s = await TestService.StartAsync(m =>
        {
            TestService.WriteModel(m, "good");
            TestService.WriteModel(m, "skewed", statisticsClasses: 6);
        });
        var p = await TestService.ProblemAsync(await s.Client.GetAsync("/readyz"), 503, "not-ready");
        string detail = p.GetProperty("detail").GetString()!;
        Assert.Contains("skewed", detail);
        Assert.Contains("6", detail);
        Assert.Contains("4", detail);
    }

    [Fact]
    public async Task Models_are_listed_by_folder_name_with_statistics_and_default_profile()
    {
        await using var s = await TestService.StartAsync(m =>
        {
            TestService.WriteModel(m, "apron-b");
            TestService.WriteModel(m, "apron-a", statistics: false);
            Directory.CreateDirectory(Path.Combine(m, "not-a-model")); // no descriptor: ignored
        });
        var json = JsonDocument.Parse(await s.Client.GetStringAsync("/v1/models")).RootElement.GetProperty("models");
        Assert.Equal(2, json.GetArrayLength());
        Assert.Equal("apron-a", json[0].GetProperty("name").GetString());
        Assert.False(json[0].GetProperty("hasStatistics").GetBoolean());
        Assert.Equal("uncalibrated", json[0].GetProperty("calibration").GetString());
        Assert.Equal("apron-b", json[1].GetProperty("name").GetString());
        Assert.True(json[1].GetProperty("hasStatistics").GetBoolean());
        Assert.NotEqual("uncalibrated", json[1].GetProperty("calibration").GetString());
        Assert.Equal(4, json[1].GetProperty("classCount").GetInt32());
        Assert.Equal("default", json[1].GetProperty("profileVersion").GetString());
        Assert.Equal("sml", json[1].GetProperty("method").GetString());
    }

    [Fact]
    public async Task Model_details_carry_calibration_summary_and_stored_profile()
    {
        const string profile = """
            { "version": "2026-11-30T10:00:00Z", "note": "night shift", "threshold": 3.5,
              "options": { "method": "energy", "minimumRegionArea": 20 } }
            """;
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a", profileJson: profile));
        var json = JsonDocument.Parse(await s.Client.GetStringAsync("/v1/models/apron-a")).RootElement;
        Assert.True(json.GetProperty("usable").GetBoolean());
        var cal = json.GetProperty("calibration");
        Assert.Equal("statistics.json", cal.GetProperty("file").GetString());
        Assert.Equal(4, cal.GetProperty("classCount").GetInt32());
        // WriteModel gives the last class only 10 pixels: below minimumCount 100, so it falls back.
        Assert.Equal(new[] { "marking" }, cal.GetProperty("fallbackClasses").EnumerateArray().Select(e => e.GetString()!).ToArray());
        var p = json.GetProperty("profile");
        Assert.Equal("2026-11-30T10:00:00Z", p.GetProperty("version").GetString());
        Assert.Equal("energy", p.GetProperty("method").GetString());
        Assert.Equal(3.5, p.GetProperty("threshold").GetDouble());
        Assert.Equal(3.5, p.GetProperty("options").GetProperty("threshold").GetDouble());
        Assert.Equal(20, p.GetProperty("options").GetProperty("minimumRegionArea").GetInt32());
        Assert.Equal(4, json.GetProperty("descriptor").GetProperty("classes").GetArrayLength());
    }

    [Fact]
    public async Task Invalid_profile_leaves_the_model_listed_but_unusable()
    {
        await using var s = await TestService.StartAsync(m =>
            TestService.WriteModel(m, "apron-a", profileJson: """{ "version": "1", "options": { "smoothing": { "kernelSize": 4 } } }"""));
        var json = JsonDocument.Parse(await s.Client.GetStringAsync("/v1/models/apron-a")).RootElement;
        Assert.False(json.GetProperty("usable").GetBoolean());
        Assert.Contains("4", json.GetProperty("error").GetString());
    }

    [Fact]
    public async Task Unknown_model_is_404_model_not_found()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var p = await TestService.ProblemAsync(await s.Client.GetAsync("/v1/models/nope"), 404, "model-not-found");
        Assert.Contains("nope", p.GetProperty("detail").GetString());
    }

    [Fact]
    public async Task Unknown_route_is_404_problem_and_wrong_method_is_405_problem()
    {
        await using var s = await TestService.StartAsync();
        await TestService.ProblemAsync(await s.Client.GetAsync("/v2/whatever"), 404, "not-found");
        await TestService.ProblemAsync(await s.Client.DeleteAsync("/v1/models"), 405, "method-not-allowed");
    }

    [Fact]
    public async Task Oversized_body_is_413_payload_too_large()
    {
        await using var s = await TestService.StartAsync(config: new Dictionary<string, string?> { ["Service:MaxRequestBytes"] = "4096" });
        var body = new ByteArrayContent(new byte[10_000]);
        var p = await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/reload", body), 413, "payload-too-large");
        Assert.Contains("4096", p.GetProperty("detail").GetString());
    }

    [Fact]
    public async Task OpenApi_document_lists_the_v1_routes_the_key_header_and_the_scope_statement()
    {
        await using var s = await TestService.StartAsync();
        var r = await s.Client.GetAsync("/openapi/v1.json");
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        var doc = JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement;
        var paths = doc.GetProperty("paths").EnumerateObject().Select(p => p.Name).ToHashSet();
        Assert.Contains("/v1/models", paths);
        Assert.Contains("/v1/models/{model}", paths);
        Assert.Contains("/v1/frames/{frameId}/{artifact}", paths);
        Assert.Contains("/healthz", paths);
        Assert.Contains("/readyz", paths);
        Assert.Contains("/v1/models/{model}/logits", paths);
        Assert.Contains("/v1/models/{model}/profile", paths);
        var scored = doc.GetProperty("components").GetProperty("schemas").GetProperty("ScoredFrame");
        var example = scored.TryGetProperty("examples", out var ex) ? ex[0] : scored.GetProperty("example");
        Assert.Equal("sml", example.GetProperty("report").GetProperty("method").GetString());
        var upload = doc.GetProperty("paths").GetProperty("/v1/models/{model}/logits").GetProperty("post").GetProperty("requestBody").GetProperty("content");
        Assert.True(upload.TryGetProperty("multipart/form-data", out _));
        Assert.Contains("not a certified safety function", doc.GetProperty("info").GetProperty("description").GetString());
        var scheme = doc.GetProperty("components").GetProperty("securitySchemes").GetProperty("ApiKey");
        Assert.Equal("X-Api-Key", scheme.GetProperty("name").GetString());

        var docs = await s.Client.GetAsync("/docs/index.html");
        Assert.Equal(HttpStatusCode.OK, docs.StatusCode);
        // Our own title bar; the explorer's stock bar and logo hidden; its licence notice kept, with the text beside it.
        string page = await docs.Content.ReadAsStringAsync();
        Assert.Contains("<h1>Strayspot API</h1>", page);
        Assert.Contains(".swagger-ui .topbar { display: none; }", page);
        Assert.Contains("Apache License, Version 2.0", page);
        var licence = await s.Client.GetAsync("/docs/LICENSE");
        Assert.Equal(HttpStatusCode.OK, licence.StatusCode);
        Assert.Contains("Apache License", await licence.Content.ReadAsStringAsync());
    }
}
