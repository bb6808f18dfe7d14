using System.Collections.Concurrent;
using Microsoft.Extensions.Options;
using Strayspot.Service.Models;

namespace Strayspot.Service.Hosting;

/// <summary>
/// The ONNX Runtime sessions of the installed models that have a model.onnx: loaded and warmed once, in the
/// background so /healthz answers meanwhile, shared by all requests (a session's Run is thread-safe).
/// </summary>
public sealed class ModelSessions(ModelCatalog catalog, IOptions<ServiceOptions> options, ILogger<ModelSessions> log) : IDisposable
{
    private readonly ConcurrentDictionary<string, Loaded> _loaded = new(StringComparer.Ordinal);
    private volatile bool _synced;

    /// <summary>A model's session, or the reason it has none.</summary>
    private sealed record Loaded(string Sha256, SegmentationModel? Model, string? Error);

    /// <summary>False until the first load pass over the catalog has finished.</summary>
    public bool Synced => _synced;

    public static bool HasOnnx(CatalogEntry entry) => entry.Sha256 is not null;

    /// <summary>The warm session of a model with model.onnx; null while loading; throws the load error if it failed.</summary>
    public SegmentationModel? Get(CatalogEntry entry)
    {
        if (!_loaded.TryGetValue(entry.Name, out var l) || l.Sha256 != entry.Sha256) return null;
        if (l.Error is not null) throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model '{entry.Name}' could not be loaded: {l.Error}");
        return l.Model;
    }

    /// <summary>Problems that keep the service from being ready: models still loading or failed.</summary>
    public IEnumerable<string> Problems()
    {
        if (!_synced) yield return "The models' ONNX sessions are still loading.";
        foreach (var e in catalog.Models.Where(m => m.IsUsable && HasOnnx(m)))
        {
            if (!_loaded.TryGetValue(e.Name, out var l) || l.Sha256 != e.Sha256) { if (_synced) yield return $"Model '{e.Name}' is not loaded yet."; }
            else if (l.Error is not null) yield return $"Model '{e.Name}' could not be loaded: {l.Error}";
        }
    }

    /// <summary>Loads every usable model whose weights are new or changed; unchanged sessions are kept.</summary>
    public void Sync()
    {
        var runtime = new ModelRuntimeOptions
        {
            IntraOpThreads = options.Value.IntraOpThreads > 0 ? options.Value.IntraOpThreads : CpuBudget.Current.IntraOpThreads,
            WarmUp = true,
        };
        foreach (var e in catalog.Models.Where(m => m.IsUsable && HasOnnx(m)))
        {
            if (_loaded.TryGetValue(e.Name, out var have) && have.Sha256 == e.Sha256) continue;
            Loaded loaded;
            try
            {
                var model = SegmentationModel.LoadFolder(e.Folder, runtime);
                loaded = new Loaded(e.Sha256!, model, null);
                log.LogInformation("Model {Model} loaded and warm in {LoadMs:0} ms", e.Name, model.LoadTime.TotalMilliseconds);
            }
            catch (Exception ex) when (ex is ModelException or IOException or UnauthorizedAccessException)
            {
                loaded = new Loaded(e.Sha256!, null, ex.Message);
                log.LogWarning("Model {Model} could not be loaded: {Reason}", e.Name, ex.Message);
            }
            // A replaced session may still serve a request in flight: it is left to the finalizer, not disposed here.
            _loaded[e.Name] = loaded;
        }
        _synced = true;
    }

    public void Dispose()
    {
        foreach (var l in _loaded.Values) l.Model?.Dispose();
        _loaded.Clear();
    }
}

/// <summary>Loads the catalog before the server takes requests, then the ONNX sessions in the background.</summary>
public sealed class ModelSessionLoader(ModelSessions sessions, ILogger<ModelSessionLoader> log) : BackgroundService
{
    protected override Task ExecuteAsync(CancellationToken stoppingToken) => Task.Run(() =>
    {
        try { sessions.Sync(); }
        catch (Exception e) { log.LogError(e, "Loading the model sessions failed"); }
    }, stoppingToken);
}
