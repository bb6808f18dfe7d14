using System.Net;
using System.Net.Http.Json;
using System.Text;
using System.Text.Json;
using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Api;

public class ProfileApiTests
{
    private static StringContent Json(string body) => new(body, Encoding.UTF8, "application/json");

    [Fact]
    public async Task A_put_profile_is_stored_versioned_and_served_back()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var r = await s.Client.PutAsync("/v1/models/apron-a/profile",
            Json(Whole("energy", -4.5, "\"note\": \"wet pavement\",")));
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(r.StatusCode == HttpStatusCode.OK, body);
        var saved = JsonDocument.Parse(body).RootElement;
        string version = saved.GetProperty("version").GetString()!;
        Assert.Matches("^[0-9]{8}T[0-9]{6}Z$", version);

        Assert.True(File.Exists(Path.Combine(s.ModelsRoot, "apron-a", "profile.json")));
        var model = JsonDocument.Parse(await s.Client.GetStringAsync("/v1/models/apron-a")).RootElement.GetProperty("profile");
        Assert.Equal(version, model.GetProperty("version").GetString());
        Assert.Equal("energy", model.GetProperty("method").GetString());
        Assert.Equal(-4.5, model.GetProperty("threshold").GetDouble());
        Assert.False(model.GetProperty("options").GetProperty("smoothing").GetProperty("enabled").GetBoolean());
        Assert.Equal("wet pavement", model.GetProperty("note").GetString());
    }

    [Theory]
    [InlineData("""{ "options": { "treshold": 3 } }""", "treshold")]
    [InlineData("""{ "options": { "smoothing": { "kernelSize": 8 } } }""", "8")]
    [InlineData("""{ "options": { "method": "guess" } }""", "$.options.method")]
    [InlineData("""not json""", "not a valid scoring profile")]
    [InlineData("""{ "version": "1", "options": { "surfaceClasses": [0, 9], "method": "sml", "energyTemperature": 1, "threshold": 2, "minimumRegionArea": 9, "boundarySuppression": { "enabled": false, "initialWidth": 4, "widthStep": 1, "iterations": 4 }, "smoothing": { "enabled": false, "kernelSize": 7, "sigma": 1, "dilation": 6 } } }""", "9")]
    public async Task A_bad_profile_is_400_validation_failed_and_nothing_is_written(string json, string expected)
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var p = await TestService.ProblemAsync(await s.Client.PutAsync("/v1/models/apron-a/profile", Json(json)), 400, "validation-failed");
        Assert.Contains(expected, p.GetProperty("detail").GetString());
        Assert.False(File.Exists(Path.Combine(s.ModelsRoot, "apron-a", "profile.json")));
    }

    [Fact]
    public async Task Profile_needs_json_an_existing_model_and_the_admin_scope()
    {
        var keys = new Dictionary<string, string?>
        {
            ["Service:ApiKeys:0:Name"] = "rig",
            ["Service:ApiKeys:0:Sha256"] = ApiKeyHash.HexOf("rig-key"),
            ["Service:ApiKeys:1:Name"] = "ops",
            ["Service:ApiKeys:1:Sha256"] = ApiKeyHash.HexOf("ops-key"),
            ["Service:ApiKeys:1:Scopes:0"] = "admin",
        };
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"), keys);
        async Task<HttpResponseMessage> Put(string model, string key, HttpContent content)
        {
            var m = new HttpRequestMessage(HttpMethod.Put, $"/v1/models/{model}/profile") { Content = content };
            m.Headers.Add("X-Api-Key", key);
            return await s.Client.SendAsync(m);
        }
        await TestService.ProblemAsync(await Put("apron-a", "rig-key", Json("{}")), 403, "forbidden");
        await TestService.ProblemAsync(await Put("nope", "ops-key", Json("{}")), 404, "model-not-found");
        await TestService.ProblemAsync(await Put("apron-a", "ops-key", new StringContent("{}", Encoding.UTF8, "text/plain")), 415, "unsupported-media-type");
        Assert.Equal(HttpStatusCode.OK, (await Put("apron-a", "ops-key", Json(Whole("sml", 2)))).StatusCode);
    }

    /// <summary>A profile body stating every setting, as a replacement must.</summary>
    private static string Whole(string method, double threshold, string extra = "") => $$"""
        { {{extra}} "options": { "method": "{{method}}", "energyTemperature": 1, "threshold": {{threshold}}, "minimumRegionArea": 9,
          "boundarySuppression": { "enabled": false, "initialWidth": 4, "widthStep": 1, "iterations": 4 },
          "smoothing": { "enabled": false, "kernelSize": 7, "sigma": 1, "dilation": 6 } } }
        """;

    [Theory]
    [InlineData("{}", "must state 'options'")]
    [InlineData("""{ "version": "x" }""", "must state 'options'")]
    [InlineData("""{ "options": null }""", "'options' must be an object")]
    [InlineData("""{ "options": { "threshold": 9 } }""", "options.method")]
    [InlineData("""{ "options": { "method": "sml", "energyTemperature": 1, "threshold": 2, "minimumRegionArea": 9, "boundarySuppression": { "enabled": true }, "smoothing": { "enabled": true, "kernelSize": 7, "sigma": 1, "dilation": 6 } } }""", "options.boundarySuppression.initialWidth")]
    public async Task An_empty_or_partial_profile_is_refused_and_the_tuned_one_stays(string body, string expected)
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        Assert.Equal(HttpStatusCode.OK, (await s.Client.PutAsync("/v1/models/apron-a/profile", Json(Whole("energy", -4.5, "\"version\": \"tuned-1\",")))).StatusCode);
        string stored = File.ReadAllText(Path.Combine(s.ModelsRoot, "apron-a", "profile.json"));

        var p = await TestService.ProblemAsync(await s.Client.PutAsync("/v1/models/apron-a/profile", Json(body)), 400, "validation-failed");
        Assert.Contains(expected, p.GetProperty("detail").GetString());
        Assert.Equal(stored, File.ReadAllText(Path.Combine(s.ModelsRoot, "apron-a", "profile.json")));
        var model = JsonDocument.Parse(await s.Client.GetStringAsync("/v1/models/apron-a")).RootElement.GetProperty("profile");
        Assert.Equal("tuned-1", model.GetProperty("version").GetString());
        Assert.Equal(-4.5, model.GetProperty("threshold").GetDouble());
    }

    [Fact]
    public async Task Shorthands_that_contradict_options_are_refused_and_agreeing_ones_pass()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var p = await TestService.ProblemAsync(await s.Client.PutAsync("/v1/models/apron-a/profile",
            Json(Whole("sml", 2, "\"threshold\": 5,"))), 400, "validation-failed");
        Assert.Contains("threshold 5 at the top level but 2", p.GetProperty("detail").GetString());
        await TestService.ProblemAsync(await s.Client.PutAsync("/v1/models/apron-a/profile",
            Json(Whole("sml", 2, "\"method\": \"energy\","))), 400, "validation-failed");
        Assert.Equal(HttpStatusCode.OK, (await s.Client.PutAsync("/v1/models/apron-a/profile",
            Json(Whole("sml", 2, "\"method\": \"sml\", \"threshold\": 2,")))).StatusCode);
    }

    [Fact]
    public async Task What_GET_shows_can_be_PUT_back_unchanged()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        var profile = JsonDocument.Parse(await s.Client.GetStringAsync("/v1/models/apron-a")).RootElement.GetProperty("profile").GetRawText();
        var r = await s.Client.PutAsync("/v1/models/apron-a/profile", Json(profile));
        Assert.True(r.StatusCode == HttpStatusCode.OK, await r.Content.ReadAsStringAsync());
    }

    [Theory]
    [InlineData("../../evil")]
    [InlineData("a b")]
    [InlineData("-lead")]
    [InlineData("x\u0000")]
    [InlineData(null)]
    public async Task A_profile_version_outside_its_pattern_or_length_is_refused(string? version)
    {
        version ??= new string('v', 10_000);
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"));
        string escaped = JsonSerializer.Serialize(version);
        var p = await TestService.ProblemAsync(await s.Client.PutAsync("/v1/models/apron-a/profile",
            Json(Whole("sml", 2, $"\"version\": {escaped},"))), 400, "validation-failed");
        Assert.Contains("'version' must be 1 to 64", p.GetProperty("detail").GetString());
        Assert.False(File.Exists(Path.Combine(s.ModelsRoot, "apron-a", "profile.json")));
        Assert.Equal(HttpStatusCode.OK, (await s.Client.PutAsync("/v1/models/apron-a/profile",
            Json(Whole("sml", 2, "\"version\": \"2026-12.apron_b\",")))).StatusCode);
    }
}
