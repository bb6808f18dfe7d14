using System.Diagnostics;
using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Calibration;
using Strayspot.Service.Frames;

namespace Strayspot.Service.Inference;

/// <summary>
/// Wall time of one frame's stages around and in the scoring core (zero for a stage that did not run), and the
/// warnings the runner found for the frame (<see cref="Reports.ScoringWarnings"/>): every path gets them from here.
/// </summary>
public sealed record FrameTimings(TimeSpan Preprocess, TimeSpan Inference, TimeSpan Scoring)
{
    public IReadOnlyList<Reports.ReportWarning> Warnings { get; init; } = [];
}

/// <summary>Sees every frame the runner scores: the service's drift watch and metrics, or nothing on the command line.</summary>
public interface IFrameObserver
{
    /// <param name="method">The method's name (an evaluation reports its primary method).</param>
    /// <param name="regions">Regions found, or null when the path finds none (evaluation).</param>
    void Scored(ModelVersion model, string method, ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, int? regions, FrameTimings timings);
}

/// <summary>
/// The one frame path: preprocess → ONNX Runtime → padding cut off → scoring core at the frame's own size, and the
/// observer every scored frame feeds. The image and logits endpoints, <c>score</c>, batches, calibration and
/// evaluation all run frames here; they differ only in what they do with the result. Thread-safe: each call rents
/// the version's pooled preprocessor and pipeline, so concurrency is bounded by the caller.
/// </summary>
public sealed class FrameRunner(IFrameObserver? observer = null)
{
    /// <summary>Scores a decoded frame and hands the result to <paramref name="consume"/> while its maps are valid.</summary>
    public T Score<T>(ModelLease model, DecodedFrame frame, ScoringOptions? options, Func<FrameScoring, FrameTimings, T> consume,
        CancellationToken cancel = default)
    {
        var slot = model.Slot;
        var used = options ?? slot.Version.Defaults;
        Models.ModelReadiness.EnsureCanScore(model.Session, slot.Version.Statistics, used, slot.Version.Folder);
        var pipeline = slot.RentPipeline(used, out string key);
        try
        {
            var scored = Network(model, frame, (logits, _) => pipeline.Score(logits, frame.Height, frame.Width), out var pre, out var inference, cancel);
            var timings = new FrameTimings(pre, inference, scored.Timings.Total) { Warnings = slot.Version.WarningsFor(frame.Width, frame.Height, used) };
            observer?.Scored(slot.Version, ScoringMethods.Of(used.Method).Name, scored.MaxLogit, scored.ClassIndex, scored.Regions.Regions.Count, timings);
            cancel.ThrowIfCancellationRequested();
            return consume(scored, timings);
        }
        finally
        {
            slot.ReturnPipeline(key, pipeline);
        }
    }

    /// <summary>Scores logits a client computed with its own copy of the model, resized to the frame's size.</summary>
    public T ScoreLogits<T>(ModelLease model, LogitsView logits, int frameHeight, int frameWidth, ScoringOptions? options,
        Func<FrameScoring, FrameTimings, T> consume, CancellationToken cancel = default)
    {
        var slot = model.Slot;
        var used = options ?? slot.Version.Defaults;
        slot.Version.EnsureCanScore(used);
        var pipeline = slot.RentPipeline(used, out string key);
        try
        {
            var scored = pipeline.Score(logits, frameHeight, frameWidth);
            var timings = new FrameTimings(TimeSpan.Zero, TimeSpan.Zero, scored.Timings.Total) { Warnings = slot.Version.WarningsFor(frameWidth, frameHeight, used) };
            observer?.Scored(slot.Version, ScoringMethods.Of(used.Method).Name, scored.MaxLogit, scored.ClassIndex, scored.Regions.Regions.Count, timings);
            cancel.ThrowIfCancellationRequested();
            return consume(scored, timings);
        }
        finally
        {
            slot.ReturnPipeline(key, pipeline);
        }
    }

    /// <summary>Calibration: runs the network and reduces the logits to class and max logit with <paramref name="reducer"/>.</summary>
    public void Reduce(ModelLease model, DecodedFrame frame, IMaxLogitReducer reducer, CancellationToken cancel = default) =>
        Network(model, frame, (logits, _) =>
        {
            reducer.Reduce(logits, frame.Height, frame.Width);
            return true;
        }, out _, out _, cancel);

    /// <summary>Evaluation: scores the frame with every method of <paramref name="scorer"/> (one network run).</summary>
    public void ScoreAllMethods(ModelLease model, DecodedFrame frame, MultiMethodScorer scorer, EvaluatedMethod primary,
        CancellationToken cancel = default)
    {
        long start = 0;
        Network(model, frame, (logits, t) =>
        {
            start = t;
            scorer.Score(logits, frame.Height, frame.Width);
            return true;
        }, out var pre, out var inference, cancel);
        var timings = new FrameTimings(pre, inference, Stopwatch.GetElapsedTime(start));
        observer?.Scored(model.Version, EvaluatedMethods.Name(primary), scorer.MaxLogit, scorer.ClassIndex, null, timings);
    }

    private delegate T LogitsStep<T>(LogitsView logits, long startTimestamp);

    private static T Network<T>(ModelLease model, DecodedFrame frame, LogitsStep<T> step, out TimeSpan preprocess, out TimeSpan inference,
        CancellationToken cancel)
    {
        var slot = model.Slot;
        var session = model.Session;
        var worker = slot.RentWorker();
        try
        {
            long t0 = Stopwatch.GetTimestamp();
            var input = worker.Preprocessor.Prepare(frame);
            long t1 = Stopwatch.GetTimestamp();
            cancel.ThrowIfCancellationRequested();
            using var output = session.Run(input);
            long t2 = Stopwatch.GetTimestamp();
            cancel.ThrowIfCancellationRequested();
            preprocess = Stopwatch.GetElapsedTime(t0, t1);
            inference = Stopwatch.GetElapsedTime(t1, t2);
            var logits = input.Box.CropToContent(output.View, ref worker.Crop);
            return step(logits, t2);
        }
        finally
        {
            slot.ReturnWorker(worker);
        }
    }
}
