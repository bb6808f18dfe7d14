using System.Net;
using Microsoft.AspNetCore.Builder;
using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Api;

/// <summary>The service on a real Kestrel at 127.0.0.1 (a free port), over temporary model and data folders.</summary>
public sealed class KestrelService : IAsyncDisposable
{
    private KestrelService(WebApplication app, string root)
    {
        App = app;
        Root = root;
        Client = new HttpClient { BaseAddress = new Uri(app.Urls.Single()), Timeout = TimeSpan.FromSeconds(60) };
    }

    public WebApplication App { get; }
    public HttpClient Client { get; }
    public string Root { get; }
    public string ModelsRoot => Path.Combine(Root, "models");
    public string DataRoot => Path.Combine(Root, "data");

    /// <param name="models">Writes model folders into the models root before the service starts.</param>
    /// <param name="unusable">Models set up to be refused: /readyz names them, so readiness means "nothing else is missing".</param>
    public static async Task<KestrelService> StartAsync(Action<string> models, IDictionary<string, string?>? config = null,
        IReadOnlyList<string>? unusable = null)
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-kestrel-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Path.Combine(root, "models"));
        Directory.CreateDirectory(Path.Combine(root, "data"));
        models(Path.Combine(root, "models"));
        var settings = new Dictionary<string, string?>
        {
            ["Service:IntraOpThreads"] = "1",
            ["Service:Batches:PollInterval"] = "00:00:00.200",
        };
        foreach (var (k, v) in config ?? new Dictionary<string, string?>()) settings[k] = v;
        var app = ServiceHost.Build(new ServiceHostSettings
        {
            ModelsRoot = Path.Combine(root, "models"), DataRoot = Path.Combine(root, "data"), ConsoleLog = false,
            Urls = ["http://127.0.0.1:0"], Configuration = settings,
        });
        await ServiceHost.StartCheckedAsync(app);
        var service = new KestrelService(app, root);
        var until = DateTime.UtcNow.AddSeconds(30);
        while (!await ReadyAsync(service.Client, unusable ?? []))
        {
            Assert.True(DateTime.UtcNow < until, "the service did not get ready within 30 s");
            await Task.Delay(50);
        }
        return service;
    }

    private static async Task<bool> ReadyAsync(HttpClient client, IReadOnlyList<string> unusable)
    {
        var r = await client.GetAsync("/readyz");
        if (r.StatusCode == HttpStatusCode.OK) return true;
        var problems = System.Text.Json.JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement.GetProperty("problems");
        return problems.EnumerateArray().All(p => unusable.Any(m => p.GetString()!.StartsWith($"Model '{m}' is unusable", StringComparison.Ordinal)
            || p.GetString()!.StartsWith($"Model '{m}' could not be loaded", StringComparison.Ordinal)));
    }

    public async ValueTask DisposeAsync()
    {
        Client.Dispose();
        await App.StopAsync();
        await App.DisposeAsync();
        try { Directory.Delete(Root, recursive: true); } catch (IOException) { }
    }
}
