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
            Json("""{ "note": "wet pavement", "options": { "method": "energy", "threshold": -4.5, "smoothing": { "enabled": false } } }"""));
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
    [InlineData("""{ "version": "1", "options": { "surfaceClasses": [0, 9] } }""", "9")]
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
        Assert.Equal(HttpStatusCode.OK, (await Put("apron-a", "ops-key", Json("{}"))).StatusCode);
    }
}
