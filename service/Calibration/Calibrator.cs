using System.Collections.Concurrent;
using System.Diagnostics;
using System.Reflection;
using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;

namespace Strayspot.Service.Calibration;

public sealed record CalibrationOptions
{
    /// <summary>Write a checkpoint after every this many frames (0: never).</summary>
    public int CheckpointEvery { get; init; } = 50;
    /// <summary>Where the checkpoint lives; null: beside the output as "&lt;out&gt;.checkpoint.json".</summary>
    public string? CheckpointPath { get; init; }
    /// <summary>Folder of grayscale PNG label maps named like the frames (extension .png); null: no label filter.</summary>
    public string? LabelsFolder { get; init; }
    public int IgnoreLabel { get; init; } = 255;
    /// <summary>Frames decoded and run at once.</summary>
    public int Workers { get; init; } = Math.Max(1, Environment.ProcessorCount / 2);
    public long MinimumCount { get; init; } = ClassStatistics.DefaultMinimumCount;
    /// <summary>Stop (as if killed) once this many frames are folded in: no artifact, the checkpoint stays. For tests and sampling runs.</summary>
    public int? StopAfterFrames { get; init; }
}

public readonly record struct CalibrationProgress(int FramesDone, int FramesTotal, int ResumedFrom);

/// <summary>
/// Measures per-class max-logit statistics over a user's in-distribution frames at each frame's own resolution:
/// decode → preprocess → model → crop padding → resize/reduce → accumulate. Frames run in parallel, but each
/// frame's statistics are folded into the totals in sorted frame order, so the result does not depend on timing
/// and a resumed run equals an unbroken one.
/// </summary>
public sealed class Calibrator
{
    private readonly FrameRunner _runner;
    private readonly ModelLease _model;
    private readonly FrameDecoder _decoder;
    private readonly Func<IMaxLogitReducer> _reducerFactory;
    private readonly CalibrationOptions _options;

    /// <param name="model">A version borrowed with its session; <paramref name="runner"/> runs every frame's network.</param>
    public Calibrator(FrameRunner runner, ModelLease model, FrameDecoder decoder, Func<IMaxLogitReducer> reducerFactory, CalibrationOptions? options = null)
    {
        _runner = runner;
        _model = model;
        _decoder = decoder;
        _reducerFactory = reducerFactory;
        _options = options ?? new CalibrationOptions();
        if (model.Version.OutputsProbabilities)
            throw new ModelException(ModelErrorCodes.MethodNeedsLogits,
                $"Model '{model.Version.Name}' outputs probabilities (output.kind): calibration measures the max-logit statistics of the sml method, " +
                "which softmax outputs cannot give. Score it with --method msp or --method entropy, which need no calibration, or export it without the final Softmax.");
        if (_options.Workers < 1 || _options.CheckpointEvery < 0)
            throw new ArgumentOutOfRangeException(nameof(options), "Workers must be ≥ 1 and CheckpointEvery ≥ 0.");
    }

    /// <summary>
    /// Image files directly in <paramref name="folder"/>, in ordinal name order. Not walked into subfolders: label
    /// maps are matched to frames by file name.
    /// </summary>
    public static IReadOnlyList<string> ListFrames(string folder)
    {
        var files = new FolderFrameSource(folder, recursive: false).Frames().Select(f => f.Path!).ToList();
        if (files.Count == 0)
            throw new FrameException(FrameErrorCodes.Missing, $"Frames folder '{folder}' holds no {FrameFormats.Listed} files.");
        return files;
    }

    /// <summary>
    /// Runs over <paramref name="frames"/> and writes the artifact to <paramref name="outputPath"/> (atomically).
    /// Returns null when stopped early by <see cref="CalibrationOptions.StopAfterFrames"/>.
    /// </summary>
    public CalibrationArtifact? Run(IReadOnlyList<string> frames, string outputPath,
        IProgress<CalibrationProgress>? progress = null, CancellationToken cancel = default)
    {
        if (frames.Count == 0)
            throw new Strayspot.Service.Frames.FrameException(Strayspot.Service.Frames.FrameErrorCodes.Missing, "No frames to calibrate with.");
        bool labelled = _options.LabelsFolder is not null;
        string checkpointPath = _options.CheckpointPath ?? outputPath + ".checkpoint.json";
        int classes = _model.Version.ClassCount;
        string sha = _model.Session.ModelSha256;
        var resumed = CalibrationCheckpoint.TryLoad(checkpointPath, sha, labelled, frames, classes);
        var total = resumed?.Restore() ?? new ClassStatisticsAccumulator(classes);
        int done = resumed?.FramesDone ?? 0;
        int resumedFrom = done;
        progress?.Report(new CalibrationProgress(done, frames.Count, resumedFrom));

        var workers = new ConcurrentBag<Worker>();
        int chunk = _options.CheckpointEvery > 0 ? _options.CheckpointEvery : 4 * _options.Workers;
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = _options.Workers, CancellationToken = cancel };
        while (done < frames.Count)
        {
            int end = Math.Min(frames.Count, done + chunk);
            if (_options.StopAfterFrames is int stop) end = Math.Min(end, Math.Max(done + 1, stop));
            var perFrame = new ClassStatisticsAccumulator[end - done];
            int first = done;
            int finishedInChunk = 0;
            try
            {
                Parallel.For(first, end, parallel, i =>
                {
                    if (!workers.TryTake(out var w)) w = new Worker(_runner, _model, _reducerFactory());
                    try { perFrame[i - first] = w.Measure(frames[i], _decoder, classes, _options); }
                    finally { workers.Add(w); }
                    progress?.Report(new CalibrationProgress(first + Interlocked.Increment(ref finishedInChunk), frames.Count, resumedFrom));
                });
            }
            catch (AggregateException e) when (e.InnerExceptions.Count > 0)
            {
                // Report the frame's own error (ModelException or ScoringInputException), not the wrapper.
                System.Runtime.ExceptionServices.ExceptionDispatchInfo.Capture(e.InnerExceptions[0]).Throw();
            }
            // Sorted frame order, whatever order the workers finished in: the sums come out identical.
            foreach (var f in perFrame) total.Merge(f);
            done = end;
            progress?.Report(new CalibrationProgress(done, frames.Count, resumedFrom));
            bool stopping = _options.StopAfterFrames is int s && done >= s && done < frames.Count;
            if ((_options.CheckpointEvery > 0 && done < frames.Count) || stopping)
                CalibrationCheckpoint.Capture(sha, labelled, frames, done, total).Save(checkpointPath);
            if (stopping) return null;
        }

        var names = _model.Version.ClassNames;
        var stats = total.ToStatistics(names, _options.MinimumCount);
        var artifact = new CalibrationArtifact
        {
            Classes = stats.Classes.ToList(),
            MinimumCount = _options.MinimumCount,
            ModelSha256 = sha,
            DescriptorSha256 = DescriptorSha256(_model.Version.Descriptor),
            FrameCount = frames.Count,
            FallbackClasses = stats.Classes.Where(c => c.Count < _options.MinimumCount || c.Std < ClassStatistics.MinimumStd).Select(c => c.Name).ToList(),
            LabelFiltered = labelled,
            MeasuredWith = CalibrationBinding.Of(_model.Version.Descriptor, CalibrationBinding.CommonFrameSize(frames)),
            ToolVersion = ToolVersion,
            CreatedUtc = DateTimeOffset.UtcNow,
        };
        artifact.Save(outputPath);
        if (File.Exists(checkpointPath)) File.Delete(checkpointPath);
        return artifact;
    }

    /// <summary>SHA-256 of the descriptor's canonical JSON (independent of the file's whitespace).</summary>
    public static string DescriptorSha256(ModelDescriptor d) =>
        Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(JsonSerializer.Serialize(d))));

    public static string ToolVersion =>
        typeof(Calibrator).Assembly.GetCustomAttribute<AssemblyInformationalVersionAttribute>()?.InformationalVersion.Split('+')[0]
        ?? typeof(Calibrator).Assembly.GetName().Version?.ToString() ?? "0";

    private sealed class Worker(FrameRunner runner, ModelLease model, IMaxLogitReducer reducer)
    {
        public ClassStatisticsAccumulator Measure(string path, FrameDecoder decoder, int classes, CalibrationOptions options)
        {
            try { return MeasureFrame(path, decoder, classes, options); }
            catch (ModelException e) when (!e.Message.Contains(path, StringComparison.Ordinal))
            {
                throw new ModelException(e.Code, $"Frame '{path}': {e.Message}", e);
            }
            catch (Strayspot.Service.Frames.FrameException e) when (!e.Message.Contains(path, StringComparison.Ordinal))
            {
                throw new Strayspot.Service.Frames.FrameException(e.Code, $"Frame '{path}': {e.Message}", e);
            }
        }

        private ClassStatisticsAccumulator MeasureFrame(string path, FrameDecoder decoder, int classes, CalibrationOptions options)
        {
            var acc = new ClassStatisticsAccumulator(classes);
            using var frame = decoder.DecodeFile(path);
            runner.Reduce(model, frame, reducer);
            if (options.LabelsFolder is null)
                acc.Add(reducer.MaxLogit, reducer.ClassIndex);
            else
            {
                string labelPath = Path.Combine(options.LabelsFolder, Path.GetFileNameWithoutExtension(path) + ".png");
                if (!File.Exists(labelPath))
                    throw new Strayspot.Service.Frames.FrameException(Strayspot.Service.Frames.FrameErrorCodes.Missing, $"Frame '{Path.GetFileName(path)}' has no label map '{labelPath}'.");
                acc.Add(reducer.MaxLogit, reducer.ClassIndex, LabelMapReader.Read(labelPath, frame.Width, frame.Height), options.IgnoreLabel);
            }
            return acc;
        }
    }
}
