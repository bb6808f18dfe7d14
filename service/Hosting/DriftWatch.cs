using System.Collections.Concurrent;
using Strayspot.Scoring.Drift;

namespace Strayspot.Service.Hosting;

/// <summary>
/// One max-logit drift monitor per model and calibration, fed by every scored frame. A model whose calibration
/// changes (new hash or reload) starts a fresh monitor.
/// </summary>
public sealed class DriftWatch(Microsoft.Extensions.Options.IOptions<ServiceOptions> options)
{
    private readonly ConcurrentDictionary<string, (string Key, MaxLogitDrift Drift)> _models = new(StringComparer.Ordinal);

    public void Observe(CatalogEntry model, ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex)
    {
        var drift = For(model);
        if (drift is null) return;
        lock (drift) drift.Observe(maxLogit, classIndex);
    }

    /// <summary>Null when the model has no class statistics to compare with.</summary>
    public DriftReport? Report(CatalogEntry model)
    {
        var drift = For(model);
        if (drift is null) return null;
        lock (drift) return drift.Report();
    }

    /// <summary>The report of a model that has seen frames under its current calibration, else null.</summary>
    public DriftReport? Peek(CatalogEntry model)
    {
        if (!_models.TryGetValue(model.Name, out var have) || have.Key != model.Sha256 + "|" + model.LoadedUtc.Ticks) return null;
        lock (have.Drift) return have.Drift.Report();
    }

    private MaxLogitDrift? For(CatalogEntry model)
    {
        if (model.Statistics is null) return null;
        string key = model.Sha256 + "|" + model.LoadedUtc.Ticks;
        var current = _models.AddOrUpdate(model.Name,
            _ => (key, New(model)),
            (_, have) => have.Key == key ? have : (key, New(model)));
        return current.Drift;
    }

    private MaxLogitDrift New(CatalogEntry model) =>
        new(model.Statistics!, options.Value.DriftHalfLifeFrames, options.Value.DriftWarningLevel);
}
