using System.Diagnostics.Metrics;

namespace Strayspot.Service.Hosting;

/// <summary>
/// The service's own instruments, scraped with ASP.NET Core's and the runtime's at <c>/metrics</c>: frames and regions
/// flagged, time per stage, queue depth and refusals, and each model's calibration drift.
/// </summary>
public sealed class ServiceMetrics : IDisposable
{
    public const string MeterName = "Strayspot";

    private readonly Meter _meter;
    private readonly Counter<long> _frames;
    private readonly Counter<long> _regions;
    private readonly Counter<long> _refused;
    private readonly Histogram<double> _stage;

    public ServiceMetrics(IMeterFactory meters, FrameGate gate, DriftWatch drift, ModelCatalog catalog, Batches.BatchService batches)
    {
        _meter = meters.Create(MeterName);
        _frames = _meter.CreateCounter<long>("strayspot.frames.scored", "{frame}", "Frames scored, by model and method.");
        _regions = _meter.CreateCounter<long>("strayspot.regions.flagged", "{region}", "Regions found in scored frames, by model.");
        _refused = _meter.CreateCounter<long>("strayspot.queue.refused", "{request}", "Frames refused because the scoring queue was full.");
        _stage = _meter.CreateHistogram<double>("strayspot.stage.duration", "s", "Time per frame in each stage: decode, preprocess, inference, scoring, encode.",
            advice: new InstrumentAdvice<double> { HistogramBucketBoundaries = [0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5] });
        _meter.CreateObservableGauge("strayspot.queue.waiting", () => gate.Queued, "{frame}", "Frames waiting for a scoring slot.");
        _meter.CreateObservableGauge("strayspot.queue.busy", () => gate.Busy, "{frame}", "Frames being scored now.");
        _meter.CreateObservableGauge("strayspot.batch.frames", () => BatchFrames(batches), "{frame}",
            "Frames of queued and running batches, by state (done, failed, pending).");
        _meter.CreateObservableGauge("strayspot.drift.overall", () => DriftOf(catalog, drift), "{std}",
            "Calibration drift per model: pixel-weighted RMS shift of the max logit, in calibrated standard deviations.");
    }

    /// <param name="regions">Null for frames scored without regions (evaluation).</param>
    public void FrameScored(string model, string method, int? regions)
    {
        _frames.Add(1, new KeyValuePair<string, object?>("model", model), new KeyValuePair<string, object?>("method", method));
        if (regions is int r) _regions.Add(r, new KeyValuePair<string, object?>("model", model));
    }

    public void Stage(string stage, TimeSpan elapsed) =>
        _stage.Record(elapsed.TotalSeconds, new KeyValuePair<string, object?>("stage", stage));

    public void Refused() => _refused.Add(1);

    private static IEnumerable<Measurement<double>> DriftOf(ModelCatalog catalog, DriftWatch drift)
    {
        foreach (var model in catalog.Models)
            if (drift.Peek(model) is { } report)
                yield return new Measurement<double>(report.Overall, new KeyValuePair<string, object?>("model", model.Name));
    }

    private static IEnumerable<Measurement<long>> BatchFrames(Batches.BatchService batches)
    {
        long done = 0, failed = 0, total = 0;
        foreach (string state in new[] { "queued", "running" })
            foreach (var b in batches.Store.List(limit: 1000, state: state))
            {
                done += b.DoneCount;
                failed += b.FailedCount;
                total += b.FrameCount;
            }
        yield return new Measurement<long>(done, new KeyValuePair<string, object?>("state", "done"));
        yield return new Measurement<long>(failed, new KeyValuePair<string, object?>("state", "failed"));
        yield return new Measurement<long>(total - done - failed, new KeyValuePair<string, object?>("state", "pending"));
    }

    public void Dispose() => _meter.Dispose();
}
