using System.Collections.Concurrent;
using System.Diagnostics;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;

namespace Strayspot.Service.Inference;

/// <summary>Wall time of the stages around the scoring core for one frame.</summary>
public sealed record FrameTimings(TimeSpan Preprocess, TimeSpan Inference, TimeSpan Scoring);

/// <summary>
/// One model's whole path for a decoded frame: preprocess → ONNX Runtime → padding cut off → scoring core at the
/// frame's own size. Thread-safe: each call borrows a worker (preprocessor, pipeline, crop buffer) from a pool,
/// so concurrency is bounded by the caller, and buffers are reused from frame to frame.
/// </summary>
public sealed class FrameScorer
{
    private readonly ConcurrentBag<Worker> _workers = new();

    public FrameScorer(SegmentationModel model, ClassStatistics? statistics, ScoringOptions defaults)
    {
        Model = model;
        Statistics = statistics;
        statistics?.EnsureClassCount(model.ClassCount);
        Defaults = defaults;
        defaults.Validate();
        if (defaults.Method == ScoreMethod.Sml && statistics is null)
            throw new ModelException(ModelErrorCodes.CalibrationInvalid,
                $"Model '{model.Descriptor.Name}' has no calibration, so it cannot score with SML; calibrate it or choose another method.");
    }

    public SegmentationModel Model { get; }
    public ClassStatistics? Statistics { get; }
    public ScoringOptions Defaults { get; }

    /// <summary>
    /// Scores <paramref name="frame"/> and hands the result to <paramref name="consume"/> while its maps are valid.
    /// <paramref name="options"/> overrides the defaults for this frame only.
    /// </summary>
    public T Score<T>(DecodedFrame frame, Func<FrameScoring, FrameTimings, T> consume, ScoringOptions? options = null,
        CancellationToken cancel = default)
    {
        var worker = _workers.TryTake(out var w) ? w : new Worker(Model.Descriptor.Input);
        try
        {
            var pipeline = options is null || options == Defaults
                ? worker.Pipeline ??= new FramePipeline(Defaults, Statistics)
                : new FramePipeline(options, Statistics);
            var scored = Run(Model, worker.Preprocessor, ref worker.CropScratch, pipeline, frame, out var timings, cancel);
            return consume(scored, timings);
        }
        finally
        {
            _workers.Add(worker);
        }
    }

    /// <summary>
    /// The frame path itself, for callers that pool their own preprocessors and pipelines: preprocess, run the model,
    /// cut the padding off the logits and score them at the frame's own size.
    /// </summary>
    public static FrameScoring Run(SegmentationModel model, FramePreprocessor preprocessor, ref float[]? cropScratch,
        FramePipeline pipeline, DecodedFrame frame, out FrameTimings timings, CancellationToken cancel = default)
    {
        long t0 = Stopwatch.GetTimestamp();
        var input = preprocessor.Prepare(frame);
        long t1 = Stopwatch.GetTimestamp();
        cancel.ThrowIfCancellationRequested();
        using var lease = model.Run(input);
        long t2 = Stopwatch.GetTimestamp();
        cancel.ThrowIfCancellationRequested();
        var logits = input.Box.CropToContent(lease.View, ref cropScratch);
        var scored = pipeline.Score(logits, frame.Height, frame.Width);
        long t3 = Stopwatch.GetTimestamp();
        timings = new FrameTimings(Stopwatch.GetElapsedTime(t0, t1), Stopwatch.GetElapsedTime(t1, t2), Stopwatch.GetElapsedTime(t2, t3));
        return scored;
    }

    private sealed class Worker(InputDescriptor input)
    {
        public readonly FramePreprocessor Preprocessor = new(input);
        public FramePipeline? Pipeline;
        public float[]? CropScratch;
    }
}
