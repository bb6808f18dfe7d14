using Serilog;

namespace Strayspot.Service.Hosting;

/// <summary>What the caller of <see cref="ServiceHost.Build"/> decides; everything else comes from configuration.</summary>
public sealed record ServiceHostSettings
{
    /// <summary>Listen addresses; null takes configuration key <c>urls</c>, then http://127.0.0.1:8080.</summary>
    public IReadOnlyList<string>? Urls { get; init; }
    public string? ModelsRoot { get; init; }
    public string? DataRoot { get; init; }
    /// <summary>Configuration entries applied last (keys like <c>Service:MaxQueuedFrames</c>).</summary>
    public IReadOnlyDictionary<string, string?>? Configuration { get; init; }
    /// <summary>Structured JSON log lines on standard output.</summary>
    public bool ConsoleLog { get; init; } = true;
    /// <summary>Extra log sinks or levels (tests capture events here).</summary>
    public Action<LoggerConfiguration>? ConfigureLogging { get; init; }
    public string? EnvironmentName { get; init; }

    public const string DefaultUrl = "http://127.0.0.1:8080";
}
