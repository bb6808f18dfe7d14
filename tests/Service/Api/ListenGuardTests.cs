using System.Diagnostics;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.TestHost;
using Microsoft.Extensions.Options;
using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Api;

/// <summary>
/// The loopback rule (no API key, no listening beyond loopback) holds for every address from every source. None of these
/// servers binds a wide address: the refusal comes before Kestrel binds anything.
/// </summary>
public class ListenGuardTests
{
    /// <summary>A host over fresh folders under <paramref name="root"/>; <paramref name="settings"/> gives what the test is about.</summary>
    private static WebApplication Host(string root, ServiceHostSettings settings, bool testServer)
    {
        Directory.CreateDirectory(Path.Combine(root, "models"));
        settings = settings with { ModelsRoot = Path.Combine(root, "models"), DataRoot = Path.Combine(root, "data"), ConsoleLog = false };
        return testServer ? ServiceHost.Build(settings, b => b.WebHost.UseTestServer()) : ServiceHost.Build(settings);
    }

    private static string NewRoot() => Path.Combine(Path.GetTempPath(), "strayspot-listen-" + Guid.NewGuid().ToString("N"));

    [Theory]
    [InlineData("http://127.0.0.1:0;http://0.0.0.0:0", "http://0.0.0.0:0")]
    [InlineData("http://localhost:0;http://[::]:0", "http://[::]:0")]
    [InlineData("http://127.0.0.1:0 ; http://*:0", "http://*:0")]
    public async Task Every_address_of_a_listed_urls_value_is_checked(string urls, string wide)
    {
        await using var app = TestService.BuildOnly(NewRoot(), urls: [urls]);
        var e = await Assert.ThrowsAsync<OptionsValidationException>(() => app.StartAsync());
        Assert.Contains($"{wide} from --urls", e.Message);
    }

    [Fact]
    public async Task A_later_urls_token_is_checked_like_the_first()
    {
        await using var app = TestService.BuildOnly(NewRoot(), urls: ["http://127.0.0.1:0", "http://0.0.0.0:0"]);
        var e = await Assert.ThrowsAsync<OptionsValidationException>(() => app.StartAsync());
        Assert.Contains("http://0.0.0.0:0 from --urls", e.Message);
    }

    [Fact]
    public async Task The_urls_setting_and_Kestrel_endpoints_are_checked()
    {
        string root = NewRoot();
        await using var fromUrls = Host(root, new ServiceHostSettings
        {
            Configuration = new Dictionary<string, string?> { ["urls"] = "http://127.0.0.1:0;http://0.0.0.0:0" },
        }, testServer: true);
        var e = await Assert.ThrowsAsync<OptionsValidationException>(() => fromUrls.StartAsync());
        Assert.Contains("http://0.0.0.0:0 from urls", e.Message);

        await using var fromKestrel = TestService.BuildOnly(root, new Dictionary<string, string?>
        {
            ["Kestrel:Endpoints:wide:Url"] = "http://0.0.0.0:0",
        });
        e = await Assert.ThrowsAsync<OptionsValidationException>(() => fromKestrel.StartAsync());
        Assert.Contains("http://0.0.0.0:0 from Kestrel:Endpoints:wide:Url", e.Message);
    }

    [Fact]
    public void Bound_addresses_are_judged_like_declared_ones()
    {
        ListenAddress Bound(string url) => new(url, "the address Kestrel bound");
        Assert.Null(ListenAddresses.Refusal([Bound("http://127.0.0.1:5001"), Bound("http://[::1]:5001")], apiKeys: 0));
        Assert.Contains("http://[::]:5002", ListenAddresses.Refusal([Bound("http://127.0.0.1:5001"), Bound("http://[::]:5002")], apiKeys: 0));
        Assert.Null(ListenAddresses.Refusal([Bound("http://[::]:5002")], apiKeys: 1));
        Assert.False(ListenAddresses.IsLoopback("http://127.0.0.1:1;http://0.0.0.0:2"));
    }

    [Fact]
    public async Task A_checked_start_on_loopback_serves()
    {
        await using var app = Host(NewRoot(), new ServiceHostSettings { Urls = ["http://127.0.0.1:0"] }, testServer: false);
        await ServiceHost.StartCheckedAsync(app);
        using var client = new HttpClient { BaseAddress = new Uri(app.Urls.Single()) };
        Assert.True((await client.GetAsync("/healthz")).IsSuccessStatusCode);
        await app.StopAsync();
    }

    /// <summary><c>dotnet strayspot.dll serve</c> with the given arguments and environment; exit code and standard error.</summary>
    private static async Task<(int Exit, string Error)> ServeAsync(string[] args, Dictionary<string, string> env)
    {
        string root = NewRoot();
        Directory.CreateDirectory(Path.Combine(root, "models"));
        var info = new ProcessStartInfo("dotnet") { RedirectStandardError = true, RedirectStandardOutput = true, UseShellExecute = false };
        foreach (string a in new[] { Path.Combine(AppContext.BaseDirectory, "strayspot.dll"), "serve", "--models", Path.Combine(root, "models"),
                     "--data", Path.Combine(root, "data") }.Concat(args))
            info.ArgumentList.Add(a);
        foreach (var (k, v) in env) info.Environment[k] = v;
        using var process = Process.Start(info)!;
        var stderr = process.StandardError.ReadToEndAsync();
        _ = process.StandardOutput.ReadToEndAsync();
        using var cts = new CancellationTokenSource(TimeSpan.FromSeconds(60));
        try { await process.WaitForExitAsync(cts.Token); }
        catch (OperationCanceledException) { process.Kill(entireProcessTree: true); throw new TimeoutException("serve did not refuse in 60 s"); }
        return (process.ExitCode, await stderr);
    }

    [Fact]
    public async Task The_serve_verb_refuses_wide_addresses_from_the_command_line_and_the_environment()
    {
        var (exit, error) = await ServeAsync(["--urls", "http://127.0.0.1:0;http://0.0.0.0:0"], new());
        Assert.True(exit == 2, error);
        Assert.Contains("http://0.0.0.0:0 from --urls", error);

        (exit, error) = await ServeAsync([], new() { ["ASPNETCORE_URLS"] = "http://localhost:0;http://[::]:0" });
        Assert.True(exit == 2, error);
        Assert.Contains("http://[::]:0 from urls", error);

        (exit, error) = await ServeAsync([], new() { ["STRAYSPOT_urls"] = "http://127.0.0.1:0;http://+:0" });
        Assert.True(exit == 2, error);
        Assert.Contains("http://+:0 from urls", error);

        (exit, error) = await ServeAsync(["--urls", "http://127.0.0.1:0"], new() { ["STRAYSPOT_Kestrel__Endpoints__side__Url"] = "http://0.0.0.0:0" });
        Assert.True(exit == 2, error);
        Assert.Contains("http://0.0.0.0:0 from Kestrel:Endpoints:side:Url", error);
    }
}

public class BatchOptionsAtStartTests
{
    [Fact]
    public async Task Bad_batch_settings_stop_the_start_and_name_the_setting()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-batchopts-" + Guid.NewGuid().ToString("N"));
        await using var app = TestService.BuildOnly(root, new Dictionary<string, string?> { ["Service:Batches:ParallelBatches"] = "0" });
        var e = await Assert.ThrowsAsync<OptionsValidationException>(() => app.StartAsync());
        Assert.Contains("Service:Batches:ParallelBatches must be 1..64; got 0", e.Message);
    }
}
