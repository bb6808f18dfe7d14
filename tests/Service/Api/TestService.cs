using System.Net.Http.Json;
using System.Text.Json;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.TestHost;
using Serilog.Core;
using Serilog.Events;
using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Api;

/// <summary>An in-process service over temporary model and data folders, with its log events captured.</summary>
public sealed class TestService : IAsyncDisposable
{
    public static readonly string[] ApronClasses = ["tarmac", "aircraft", "tug", "marking"];

    private TestService(WebApplication app, string root, LogCapture log)
    {
        App = app;
        Root = root;
        Log = log;
        Client = app.GetTestClient();
    }

    public WebApplication App { get; }
    public HttpClient Client { get; }
    public string Root { get; }
    public string ModelsRoot => Path.Combine(Root, "models");
    public string DataRoot => Path.Combine(Root, "data");
    public LogCapture Log { get; }

    public static WebApplication BuildOnly(string root, IDictionary<string, string?>? config = null,
        IReadOnlyList<string>? urls = null, LogCapture? log = null)
    {
        Directory.CreateDirectory(Path.Combine(root, "models"));
        Directory.CreateDirectory(Path.Combine(root, "data"));
        return ServiceHost.Build(new ServiceHostSettings
        {
            ModelsRoot = Path.Combine(root, "models"),
            DataRoot = Path.Combine(root, "data"),
            Urls = urls ?? ["http://127.0.0.1:0"],
            Configuration = config?.ToDictionary(),
            ConsoleLog = false,
            ConfigureLogging = log is null ? null : cfg => cfg.WriteTo.Sink(log),
        }, b => b.WebHost.UseTestServer());
    }

    /// <param name="models">Writes model folders into the models root before the service starts.</param>
    public static async Task<TestService> StartAsync(Action<string>? models = null, IDictionary<string, string?>? config = null)
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Path.Combine(root, "models"));
        models?.Invoke(Path.Combine(root, "models"));
        var log = new LogCapture();
        var app = BuildOnly(root, config, log: log);
        await app.StartAsync();
        return new TestService(app, root, log);
    }

    /// <summary>A model folder with a descriptor and, unless told otherwise, statistics for every class.</summary>
    public static string WriteModel(string modelsRoot, string name, IReadOnlyList<string>? classes = null,
        bool statistics = true, int? statisticsClasses = null, string? profileJson = null)
    {
        classes ??= ApronClasses;
        string folder = Path.Combine(modelsRoot, name);
        Directory.CreateDirectory(folder);
        var descriptor = new
        {
            name,
            description = "test model " + name,
            classes = classes.Select(c => new { name = c }).ToArray(),
            input = new { size = new { mode = "fixed", height = 64, width = 96 } },
        };
        File.WriteAllText(Path.Combine(folder, "descriptor.json"), JsonSerializer.Serialize(descriptor));
        if (statistics)
        {
            int n = statisticsClasses ?? classes.Count;
            var stats = new
            {
                classes = Enumerable.Range(0, n).Select(i => new { name = i < classes.Count ? classes[i] : "extra" + i, count = i == n - 1 ? 10 : 5000, mean = 5.0 + i, std = 1.0 + 0.25 * i }).ToArray(),
                minimumCount = 100,
            };
            File.WriteAllText(Path.Combine(folder, "statistics.json"), JsonSerializer.Serialize(stats));
        }
        if (profileJson is not null) File.WriteAllText(Path.Combine(folder, "profile.json"), profileJson);
        return folder;
    }

    public static async Task<JsonElement> ProblemAsync(HttpResponseMessage response, int status, string code)
    {
        string body = await response.Content.ReadAsStringAsync();
        Assert.True(status == (int)response.StatusCode, $"expected {status}, got {(int)response.StatusCode}: {body}");
        Assert.Equal("application/problem+json", response.Content.Headers.ContentType?.MediaType);
        var json = JsonDocument.Parse(body).RootElement;
        Assert.Equal(code, json.GetProperty("code").GetString());
        Assert.Equal(status, json.GetProperty("status").GetInt32());
        Assert.False(string.IsNullOrEmpty(json.GetProperty("traceId").GetString()));
        Assert.False(string.IsNullOrEmpty(json.GetProperty("title").GetString()));
        return json;
    }

    public async ValueTask DisposeAsync()
    {
        Client.Dispose();
        await App.StopAsync();
        await App.DisposeAsync();
        try { Directory.Delete(Root, recursive: true); } catch (IOException) { }
    }
}

/// <summary>Every log event rendered with its properties, to check what the service writes (and never writes).</summary>
public sealed class LogCapture : ILogEventSink
{
    private readonly List<LogEvent> _events = new();

    public void Emit(LogEvent logEvent)
    {
        lock (_events) _events.Add(logEvent);
    }

    public IReadOnlyList<LogEvent> Events
    {
        get { lock (_events) return _events.ToList(); }
    }

    /// <summary>All events as text: message, properties and exceptions.</summary>
    public string AllText()
    {
        var sb = new System.Text.StringBuilder();
        foreach (var e in Events)
        {
            sb.AppendLine(e.RenderMessage());
            foreach (var (k, v) in e.Properties) sb.Append(k).Append('=').AppendLine(v.ToString());
            if (e.Exception is not null) sb.AppendLine(e.Exception.ToString());
        }
        return sb.ToString();
    }
}
