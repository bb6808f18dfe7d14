using System.Collections.Concurrent;
using Strayspot.Scoring.Drift;
using Strayspot.Service.Inference;

namespace Strayspot.Service.Hosting;

/// <summary>
/// One max-logit drift monitor per model version, fed by every frame the <see cref="FrameRunner"/> scores (HTTP,
/// batches, evaluations). A new version (weights, descriptor, calibration or profile changed) starts a fresh monitor.
/// </summary>
public sealed class DriftWatch(Microsoft.Extensions.Options.IOptions<ServiceOptions> options)
{
    private readonly ConcurrentDictionary<string, (string Key, MaxLogitDrift Drift)> _models = new(StringComparer.Ordinal);

    public void Observe(ModelVersion model, ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex)
    {
        var drift = For(model);
        if (drift is null) return;
        lock (drift) drift.Observe(maxLogit, classIndex);
    }

    /// <summary>Null when the model has no class statistics to compare with.</summary>
    public DriftReport? Report(CatalogEntry model)
    {
        if (model.Version is null) return null;
        var drift = For(model.Version);
        if (drift is null) return null;
        lock (drift) return drift.Report();
    }

    /// <summary>The report of a model that has seen frames under its current version, else null.</summary>
    public DriftReport? Peek(CatalogEntry model)
    {
        if (model.Version is null || !_models.TryGetValue(model.Name, out var have) || have.Key != model.Version.Key) return null;
        lock (have.Drift) return have.Drift.Report();
    }

    private MaxLogitDrift? For(ModelVersion model)
    {
        if (model.Statistics is null) return null;
        var current = _models.AddOrUpdate(model.Name,
            _ => (model.Key, New(model)),
            (_, have) => have.Key == model.Key ? have : (model.Key, New(model)));
        return current.Drift;
    }

    private MaxLogitDrift New(ModelVersion model) =>
        new(model.Statistics!, options.Value.DriftHalfLifeFrames, options.Value.DriftWarningLevel);
}

/// <summary>What every scored frame feeds in the service: the drift watch, the frame and region counters and the stage times.</summary>
public sealed class ServiceFrameObserver(DriftWatch drift, ServiceMetrics metrics) : IFrameObserver
{
    public void Scored(ModelVersion model, string method, ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, int? regions, FrameTimings timings)
    {
        drift.Observe(model, maxLogit, classIndex);
        if (timings.Preprocess > TimeSpan.Zero) metrics.Stage("preprocess", timings.Preprocess);
        if (timings.Inference > TimeSpan.Zero) metrics.Stage("inference", timings.Inference);
        metrics.Stage("scoring", timings.Scoring);
        metrics.FrameScored(model.Name, method, regions);
    }
}
