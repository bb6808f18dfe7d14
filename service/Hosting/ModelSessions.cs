using Strayspot.Service.Inference;
using Strayspot.Service.Models;

namespace Strayspot.Service.Hosting;

/// <summary>
/// The catalog's models in the process's <see cref="ModelRegistry"/>: each ONNX model's session loaded and warmed
/// once, in the background so /healthz answers meanwhile, and borrowed by every request, batch and job. A reload
/// loads changed versions; a replaced session is disposed by the registry when its last borrower returns it.
/// </summary>
public sealed class ModelSessions(ModelCatalog catalog, ModelRegistry registry, ILogger<ModelSessions> log)
{
    private volatile bool _synced;

    /// <summary>False until the first load pass over the catalog has finished.</summary>
    public bool Synced => _synced;

    public ModelRegistry Registry => registry;

    public static bool HasOnnx(CatalogEntry entry) => entry.Sha256 is not null;

    /// <summary>The model's warm version for a request; null while its session loads; throws the load error if it failed.</summary>
    public ModelLease? TryBorrow(CatalogEntry entry) => registry.Borrow(Usable(entry), SessionUse.IfLoaded);

    /// <summary>The model's version without its session, for logits computed elsewhere.</summary>
    public ModelLease BorrowPools(CatalogEntry entry) => registry.Borrow(Usable(entry), SessionUse.None)!;

    /// <summary>The model's version for background work (batches, jobs): loads the session when it is not loaded yet.</summary>
    public ModelLease Borrow(CatalogEntry entry) => registry.BorrowLoaded(Usable(entry));

    /// <summary>Problems that keep the service from being ready: models still loading or failed.</summary>
    public IEnumerable<string> Problems()
    {
        if (!_synced) yield return "The models' ONNX sessions are still loading.";
        foreach (var e in catalog.Models.Where(m => m.IsUsable && HasOnnx(m)))
        {
            if (registry.LoadError(e.Version!) is { } error) yield return $"Model '{e.Name}' could not be loaded: {error}";
            else if (!registry.IsReady(e.Version!) && _synced) yield return $"Model '{e.Name}' is not loaded yet.";
        }
    }

    /// <summary>Loads every usable model whose version is new or changed; unchanged sessions are kept.</summary>
    public void Sync()
    {
        var models = catalog.Models;
        registry.RetireExcept(models.Where(m => m.IsUsable).Select(m => m.Name).ToHashSet(StringComparer.Ordinal));
        foreach (var e in models.Where(m => m.IsUsable && HasOnnx(m)))
        {
            if (registry.IsReady(e.Version!)) continue;
            try
            {
                var clock = System.Diagnostics.Stopwatch.StartNew();
                registry.Load(e.Version!);
                log.LogInformation("Model {Model} loaded and warm in {LoadMs:0} ms", e.Name, clock.Elapsed.TotalMilliseconds);
            }
            catch (Exception ex) when (ex is ModelException or IOException or UnauthorizedAccessException)
            {
                log.LogWarning("Model {Model} could not be loaded: {Reason}", e.Name, ex.Message);
            }
        }
        _synced = true;
    }

    private static ModelVersion Usable(CatalogEntry entry) => entry.Version
        ?? throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model '{entry.Name}' cannot be used: {entry.Error}");
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
