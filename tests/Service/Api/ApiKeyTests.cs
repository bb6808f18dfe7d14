using System.Net;
using Microsoft.Extensions.Options;
using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Api;

public class ApiKeyTests
{
    private const string RigKey = "rig-7-secret-key-4f1c9a";
    private const string AdminKey = "ops-admin-key-77b2e0";

    // SHA-256 of "abc" from FIPS 180-2, appendix B.1 (the published worked example).
    [Fact]
    public void Key_hash_is_sha256_of_utf8_bytes_FIPS_180_2_example()
    {
        Assert.Equal("ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad", ApiKeyHash.HexOf("abc"));
    }

    private static Dictionary<string, string?> Keys() => new()
    {
        ["Service:ApiKeys:0:Name"] = "rig-7",
        ["Service:ApiKeys:0:Sha256"] = ApiKeyHash.HexOf(RigKey),
        ["Service:ApiKeys:1:Name"] = "ops",
        ["Service:ApiKeys:1:Sha256"] = ApiKeyHash.HexOf(AdminKey).ToUpperInvariant(), // hex case does not matter
        ["Service:ApiKeys:1:Scopes:0"] = "admin",
    };

    private static HttpRequestMessage Get(string path, string? key)
    {
        var m = new HttpRequestMessage(HttpMethod.Get, path);
        if (key is not null) m.Headers.Add("X-Api-Key", key);
        return m;
    }

    [Fact]
    public async Task Missing_or_wrong_key_is_401_and_a_valid_key_passes()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"), Keys());
        var missing = await s.Client.SendAsync(Get("/v1/models", null));
        await TestService.ProblemAsync(missing, 401, "unauthorized");
        Assert.Contains("X-Api-Key", missing.Headers.WwwAuthenticate.ToString());

        var wrong = await TestService.ProblemAsync(await s.Client.SendAsync(Get("/v1/models", RigKey + "x")), 401, "unauthorized");
        Assert.Contains("not hold an accepted key", wrong.GetProperty("detail").GetString());

        Assert.Equal(HttpStatusCode.OK, (await s.Client.SendAsync(Get("/v1/models", RigKey))).StatusCode);
        // Unknown routes still answer 404 to a keyed client, 401 to anyone else.
        await TestService.ProblemAsync(await s.Client.SendAsync(Get("/v1/nothing", null)), 401, "unauthorized");
    }

    [Fact]
    public async Task Health_and_docs_need_no_key()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"), Keys());
        Assert.Equal(HttpStatusCode.OK, (await s.Client.SendAsync(Get("/healthz", null))).StatusCode);
        Assert.Equal(HttpStatusCode.OK, (await s.Client.SendAsync(Get("/readyz", null))).StatusCode);
        Assert.Equal(HttpStatusCode.OK, (await s.Client.SendAsync(Get("/openapi/v1.json", null))).StatusCode);
    }

    [Fact]
    public async Task Admin_endpoint_is_403_for_a_key_without_the_scope_and_200_with_it()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"), Keys());
        HttpRequestMessage Reload(string? key)
        {
            var m = new HttpRequestMessage(HttpMethod.Post, "/v1/models/reload");
            if (key is not null) m.Headers.Add("X-Api-Key", key);
            return m;
        }
        await TestService.ProblemAsync(await s.Client.SendAsync(Reload(null)), 401, "unauthorized");
        await TestService.ProblemAsync(await s.Client.SendAsync(Reload(RigKey)), 403, "forbidden");
        Assert.Equal(HttpStatusCode.OK, (await s.Client.SendAsync(Reload(AdminKey))).StatusCode);
    }

    [Fact]
    public async Task Keys_never_reach_the_log_but_the_key_name_does()
    {
        await using var s = await TestService.StartAsync(m => TestService.WriteModel(m, "apron-a"), Keys());
        await s.Client.SendAsync(Get("/v1/models", RigKey));
        await s.Client.SendAsync(Get("/v1/models", "a-wrong-key-9d3e"));
        await s.Client.SendAsync(Get("/v1/models/apron-a", RigKey));
        string log = s.Log.AllText();
        Assert.Contains("responded 200", log); // the request log works, so its absence below means something
        Assert.Contains("rig-7", log);
        var request = s.Log.Events.First(e => e.Properties.ContainsKey("StatusCode"));
        Assert.Equal("\"/v1/models\"", request.Properties["Route"].ToString());
        Assert.True(request.Properties.ContainsKey("RequestId"));
        Assert.True(request.Properties.ContainsKey("Elapsed"));
        Assert.DoesNotContain(RigKey, log);
        Assert.DoesNotContain("a-wrong-key-9d3e", log);
        Assert.DoesNotContain(ApiKeyHash.HexOf(RigKey), log);
    }

    [Fact]
    public async Task Listening_beyond_loopback_without_keys_refuses_to_start_with_a_clear_message()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        await using var app = TestService.BuildOnly(root, urls: ["http://0.0.0.0:8080"]);
        var e = await Assert.ThrowsAsync<OptionsValidationException>(() => app.StartAsync());
        Assert.Contains("no API key is configured", e.Message);
        Assert.Contains("0.0.0.0", e.Message);
    }

    [Theory]
    [InlineData("http://127.0.0.1:8080", true)]
    [InlineData("http://localhost:5000", true)]
    [InlineData("http://[::1]:8080", true)]
    [InlineData("http://0.0.0.0:8080", false)]
    [InlineData("http://*:8080", false)]
    [InlineData("http://+:8080", false)]
    [InlineData("http://[::]:8080", false)]
    [InlineData("http://10.1.2.3:8080", false)]
    public void Loopback_addresses_are_told_apart(string url, bool loopback) =>
        Assert.Equal(loopback, ListenAddresses.IsLoopback(url));

    [Fact]
    public async Task Wide_listening_with_a_key_starts()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        await using var app = TestService.BuildOnly(root, Keys(), urls: ["http://0.0.0.0:8080"]);
        await app.StartAsync();
        await app.StopAsync();
    }

    [Fact]
    public async Task A_key_that_is_not_a_sha256_hash_is_refused_at_start()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        var config = new Dictionary<string, string?> { ["Service:ApiKeys:0:Name"] = "oops", ["Service:ApiKeys:0:Sha256"] = "plain-key" };
        await using var app = TestService.BuildOnly(root, config);
        var e = await Assert.ThrowsAsync<OptionsValidationException>(() => app.StartAsync());
        Assert.Contains("Service:ApiKeys:0:Sha256", e.Message);
        Assert.DoesNotContain("plain-key", e.Message);
    }
}
