using System.CommandLine;
using Strayspot.Service.Cli;
using Strayspot.Service.Hosting;
using Strayspot.Tests.Service.Api;

namespace Strayspot.Tests.Service.Hosting;

public class CliVerbTests
{
    private static async Task<(int Exit, string Out, string Err)> Run(Command verb, params string[] args)
    {
        var output = new StringWriter();
        var error = new StringWriter();
        int exit = await verb.Parse(args).InvokeAsync(new InvocationConfiguration { Output = output, Error = error });
        return (exit, output.ToString(), error.ToString());
    }

    [Fact]
    public async Task Healthcheck_exits_0_against_a_live_server_on_loopback_and_1_when_it_is_gone()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Path.Combine(root, "models"));
        var app = ServiceHost.Build(new ServiceHostSettings
        {
            ModelsRoot = Path.Combine(root, "models"),
            DataRoot = Path.Combine(root, "data"),
            Urls = ["http://127.0.0.1:0"],
            ConsoleLog = false,
        });
        await app.StartAsync();
        string url = app.Urls.Single();
        try
        {
            var live = await Run(HealthcheckVerb.Create(), "--url", url);
            Assert.True(live.Exit == 0, live.Err);
            Assert.Contains("/healthz answered 200", live.Out);

            // No model installed: alive but not ready.
            var ready = await Run(HealthcheckVerb.Create(), "--url", url, "--ready");
            Assert.Equal(1, ready.Exit);
            Assert.Contains("503", ready.Err);
        }
        finally
        {
            await app.StopAsync();
            await app.DisposeAsync();
        }
        var gone = await Run(HealthcheckVerb.Create(), "--url", url, "--timeout", "2");
        Assert.Equal(1, gone.Exit);
        Assert.Contains("did not answer", gone.Err);
    }

    [Theory]
    [InlineData("http://10.0.0.5:8080")]
    [InlineData("ftp://127.0.0.1:21")]
    [InlineData("not a url")]
    public async Task Healthcheck_refuses_addresses_that_are_not_local_http(string url)
    {
        var r = await Run(HealthcheckVerb.Create(), "--url", url);
        Assert.Equal(2, r.Exit);
        Assert.Contains(url, r.Err);
    }

    [Fact]
    public async Task Serve_refuses_an_open_address_without_keys_with_exit_2_and_the_reason()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Path.Combine(root, "models"));
        var r = await Run(ServeVerb.Create(), "--models", Path.Combine(root, "models"), "--data", Path.Combine(root, "data"), "--urls", "http://0.0.0.0:0");
        Assert.Equal(2, r.Exit);
        Assert.Contains("no API key is configured", r.Err);
    }

    [Fact]
    public async Task Serve_refuses_a_missing_models_folder_with_exit_2()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        var r = await Run(ServeVerb.Create(), "--models", Path.Combine(root, "nowhere"), "--data", Path.Combine(root, "data"), "--urls", "http://127.0.0.1:0");
        Assert.Equal(2, r.Exit);
        Assert.Contains("nowhere", r.Err);
    }

    [Fact]
    public async Task Serve_runs_until_cancelled_then_exits_0()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Path.Combine(root, "models"));
        TestService.WriteModel(Path.Combine(root, "models"), "apron-a");
        using var cts = new CancellationTokenSource(TimeSpan.FromSeconds(2));
        int exit = await ServeVerb.RunAsync(new ServiceHostSettings
        {
            ModelsRoot = Path.Combine(root, "models"),
            DataRoot = Path.Combine(root, "data"),
            Urls = ["http://127.0.0.1:0"],
            ConsoleLog = false,
        }, TextWriter.Null, cts.Token);
        Assert.Equal(0, exit);
    }
}
