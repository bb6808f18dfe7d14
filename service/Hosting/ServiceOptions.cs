using System.Net;
using Microsoft.Extensions.Options;

namespace Strayspot.Service.Hosting;

/// <summary>
/// The service's settings: section <c>Service</c> of appsettings.json, overridden by environment variables
/// such as <c>STRAYSPOT_Service__ModelsRoot</c> and by the <c>serve</c> verb's options.
/// </summary>
public sealed class ServiceOptions
{
    public const string Section = "Service";

    /// <summary>Folder holding one subfolder per model (descriptor.json, model.onnx, statistics, profile).</summary>
    public string ModelsRoot { get; set; } = "models";
    /// <summary>Folder the service may read and write (batches, artifacts); request paths never leave it.</summary>
    public string DataRoot { get; set; } = "data";
    /// <summary>Where per-frame artifacts go; defaults to DataRoot/artifacts.</summary>
    public string? ArtifactsRoot { get; set; }
    /// <summary>How long a frame's artifacts stay downloadable.</summary>
    public TimeSpan ArtifactRetention { get; set; } = TimeSpan.FromHours(1);
    public long MaxRequestBytes { get; set; } = 64L * 1024 * 1024;
    /// <summary>Largest frame (width × height) accepted, for images and for the frame size given with logits.</summary>
    public long MaxPixels { get; set; } = 4096L * 4096;
    /// <summary>
    /// Frames scored at the same time; the rest wait in a bounded queue. Unset, the container's CPU quota decides
    /// (<see cref="CpuBudget.FramesInFlight"/>): two from 2 CPUs up, each network on half the threads, so one
    /// frame's decoding and post-hoc stages run while the other's network does.
    /// </summary>
    public int MaxConcurrentFrames { get; set; } = CpuBudget.Current.FramesInFlight;
    /// <summary>Frames allowed to wait for a slot; beyond this a request gets 429 at once.</summary>
    public int MaxQueuedFrames { get; set; } = 16;
    /// <summary>Budget for one frame, queueing included.</summary>
    public TimeSpan RequestTimeout { get; set; } = TimeSpan.FromSeconds(30);
    /// <summary>Accepted API keys, stored as SHA-256 hashes; required when the service listens beyond loopback.</summary>
    public List<ApiKeyOptions> ApiKeys { get; set; } = new();
    /// <summary>Threads one model inference may use (ONNX Runtime intra-op); 0 = from the container's CPU quota (<see cref="CpuBudget"/>).</summary>
    public int IntraOpThreads { get; set; }
    /// <summary>
    /// ONNX Runtime's memory pattern (pre-planned buffers per input shape). Off by default: measured on the demo model at
    /// 1024×512 it held a few hundred MB per session for no measurable speed (README, Benchmarks).
    /// </summary>
    public bool OnnxMemoryPattern { get; set; }
    /// <summary>
    /// Inferences one model session runs at once (0: as many as frames in flight). Below Service:MaxConcurrentFrames,
    /// the other frames decode, preprocess and score while the network runs.
    /// </summary>
    public int NetworkRunsAtOnce { get; set; }
    /// <summary>
    /// Intra-op threads of a network run that starts while no other runs on its model (0: off). Above the intra-op
    /// threads, each model keeps a second ONNX Runtime session with this many threads for such runs (its own arena).
    /// </summary>
    public int LoneRunThreads { get; set; }
    /// <summary>Frames after which a frame's weight in the drift statistics has halved.</summary>
    public double DriftHalfLifeFrames { get; set; } = 500;
    /// <summary>Overall drift, in calibrated standard deviations, that raises the drift warning (our default; tune per fleet).</summary>
    public double DriftWarningLevel { get; set; } = 1.0;

    public string ResolvedArtifactsRoot => ArtifactsRoot ?? Path.Combine(DataRoot, "artifacts");
}

/// <summary>One accepted API key: only its hash is configured, never the key itself.</summary>
public sealed class ApiKeyOptions
{
    /// <summary>Who holds the key (a rig, a labeling backend); used in logs instead of the key.</summary>
    public string Name { get; set; } = "";
    /// <summary>SHA-256 of the key's UTF-8 bytes, 64 hex digits (e.g. <c>printf %s "$KEY" | sha256sum</c>).</summary>
    public string Sha256 { get; set; } = "";
    /// <summary>Extra rights, e.g. <c>admin</c>; every valid key may list models and score frames.</summary>
    public List<string> Scopes { get; set; } = new();
}

/// <summary>Refuses a configuration the service cannot run safely with, naming the setting and its value.</summary>
public sealed class ServiceOptionsValidator(ListenAddresses listen) : IValidateOptions<ServiceOptions>
{
    public ValidateOptionsResult Validate(string? name, ServiceOptions o)
    {
        var errors = new List<string>();
        void Check(bool ok, string message) { if (!ok) errors.Add(message); }

        Check(!string.IsNullOrWhiteSpace(o.ModelsRoot), "Service:ModelsRoot must name a folder.");
        Check(!string.IsNullOrWhiteSpace(o.DataRoot), "Service:DataRoot must name a folder.");
        if (!string.IsNullOrWhiteSpace(o.ModelsRoot))
            Check(Directory.Exists(o.ModelsRoot), $"Service:ModelsRoot '{o.ModelsRoot}' does not exist.");
        Check(o.ArtifactRetention > TimeSpan.Zero, $"Service:ArtifactRetention must be positive; got {o.ArtifactRetention}.");
        Check(o.MaxRequestBytes >= 1024, $"Service:MaxRequestBytes must be at least 1024; got {o.MaxRequestBytes}.");
        Check(o.MaxPixels >= 1, $"Service:MaxPixels must be positive; got {o.MaxPixels}.");
        Check(o.MaxConcurrentFrames is >= 1 and <= 1024, $"Service:MaxConcurrentFrames must be 1..1024; got {o.MaxConcurrentFrames}.");
        Check(o.MaxQueuedFrames is >= 0 and <= 100_000, $"Service:MaxQueuedFrames must be 0..100000; got {o.MaxQueuedFrames}.");
        Check(o.RequestTimeout > TimeSpan.Zero, $"Service:RequestTimeout must be positive; got {o.RequestTimeout}.");
        Check(o.NetworkRunsAtOnce is >= 0 and <= 1024, $"Service:NetworkRunsAtOnce must be 0..1024; got {o.NetworkRunsAtOnce}.");
        Check(o.LoneRunThreads is >= 0 and <= 1024, $"Service:LoneRunThreads must be 0..1024; got {o.LoneRunThreads}.");
        Check(o.IntraOpThreads is >= 0 and <= 1024, $"Service:IntraOpThreads must be 0..1024; got {o.IntraOpThreads}.");

        for (int i = 0; i < o.ApiKeys.Count; i++)
        {
            var k = o.ApiKeys[i];
            Check(ApiKeyHash.TryParseHex(k.Sha256, out _),
                $"Service:ApiKeys:{i}:Sha256 ('{k.Name}') must be 64 hex digits (the SHA-256 of the key, not the key itself).");
        }

        if (ListenAddresses.Refusal(listen.Declared, o.ApiKeys.Count) is { } refusal) errors.Add(refusal);

        return errors.Count == 0 ? ValidateOptionsResult.Success : ValidateOptionsResult.Fail(errors);
    }
}

/// <summary>One address the server is told to listen on and the setting that said so.</summary>
public sealed record ListenAddress(string Url, string Source);

/// <summary>The addresses the server was told to listen on, kept so startup can refuse an open port without keys.</summary>
public sealed class ListenAddresses(IReadOnlyList<ListenAddress> declared)
{
    public IReadOnlyList<ListenAddress> Declared { get; } = declared;
    public IReadOnlyList<string> Urls => Declared.Select(d => d.Url).ToList();

    /// <summary>Every address in the given strings, each of which may list several separated by ';'.</summary>
    public static List<string> Split(IEnumerable<string> values) =>
        values.SelectMany(v => v.Split(';', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries)).ToList();

    /// <summary>Why the service must not start (each wide address and its setting), or null.</summary>
    public static string? Refusal(IReadOnlyList<ListenAddress> addresses, int apiKeys)
    {
        if (apiKeys > 0) return null;
        var wide = addresses.Where(a => !IsLoopback(a.Url)).ToList();
        if (wide.Count == 0) return null;
        return $"The service would listen beyond loopback ({string.Join(", ", wide.Select(w => $"{w.Url} from {w.Source}"))}) " +
               "but no API key is configured: set Service:ApiKeys (e.g. STRAYSPOT_Service__ApiKeys__0__Sha256=<sha256 hex of the key>) " +
               "or listen on 127.0.0.1 only.";
    }

    public static bool IsLoopback(string url)
    {
        // "http://*:80", "http://+:80" and "http://0.0.0.0:80" all mean every interface; an unsplit list is never loopback.
        if (url.Contains(';')) return false;
        int scheme = url.IndexOf("://", StringComparison.Ordinal);
        string rest = scheme >= 0 ? url[(scheme + 3)..] : url;
        string host;
        if (rest.StartsWith('['))
        {
            int close = rest.IndexOf(']');
            host = close > 0 ? rest[1..close] : rest;
        }
        else
        {
            int end = rest.IndexOfAny([':', '/']);
            host = end >= 0 ? rest[..end] : rest;
        }
        if (host.Equals("localhost", StringComparison.OrdinalIgnoreCase)) return true;
        return IPAddress.TryParse(host, out var ip) && IPAddress.IsLoopback(ip);
    }
}
