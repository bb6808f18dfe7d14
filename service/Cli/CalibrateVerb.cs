using System.CommandLine;
using System.Diagnostics;
using System.Globalization;
using Spectre.Console;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Calibration;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;

namespace Strayspot.Service.Cli;

/// <summary>
/// <c>strayspot calibrate &lt;model-folder&gt; &lt;frames-folder&gt;</c>: measures the per-class statistics SML needs
/// on the user's own in-distribution frames and writes <c>calibration.json</c> (by default into the model folder).
/// </summary>
public static class CalibrateVerb
{
    public const int BadInput = 2;
    public const int Interrupted = 130;

    public static Command Create(Func<IMaxLogitReducer> reducerFactory)
    {
        var modelFolder = new Argument<DirectoryInfo>("model-folder") { Description = "Folder with model.onnx and descriptor.json." };
        var framesFolder = new Argument<DirectoryInfo>("frames-folder") { Description = "Folder of in-distribution frames (PNG, JPEG, WebP)." };
        var labels = new Option<DirectoryInfo?>("--labels") { Description = "Folder of grayscale PNG label maps named like the frames: only correctly predicted pixels are counted." };
        var ignore = new Option<int>("--ignore-label") { Description = "Label value that marks unlabelled pixels.", DefaultValueFactory = _ => 255 };
        var every = new Option<int>("--checkpoint-every") { Description = "Save progress every N frames so an interrupted run resumes (0: never).", DefaultValueFactory = _ => 50 };
        var output = new Option<FileInfo?>("--out") { Description = "Where to write the calibration (default: <model-folder>/calibration.json)." };
        var workers = new Option<int>("--workers") { Description = "Frames processed at once.", DefaultValueFactory = _ => Math.Max(1, Environment.ProcessorCount / 2) };
        var threads = new Option<int>("--threads") { Description = "Threads per inference.", DefaultValueFactory = _ => Math.Max(1, Environment.ProcessorCount / 2) };
        var minimum = new Option<long>("--minimum-count") { Description = "Classes with fewer pixels fall back to pooled statistics.", DefaultValueFactory = _ => 100 };

        var command = new Command("calibrate", "Measure per-class max-logit statistics of a model on your own frames (needed by the SML score).");
        command.Arguments.Add(modelFolder);
        command.Arguments.Add(framesFolder);
        foreach (var o in new Option[] { labels, ignore, every, output, workers, threads, minimum }) command.Options.Add(o);

        command.SetAction((parseResult, cancel) =>
        {
            var stdout = parseResult.InvocationConfiguration.Output;
            var stderr = parseResult.InvocationConfiguration.Error;
            var folder = parseResult.GetValue(modelFolder)!;
            string outPath = parseResult.GetValue(output)?.FullName ?? Path.Combine(folder.FullName, CalibrationArtifact.FileName);
            var options = new CalibrationOptions
            {
                LabelsFolder = parseResult.GetValue(labels)?.FullName,
                IgnoreLabel = parseResult.GetValue(ignore),
                CheckpointEvery = parseResult.GetValue(every),
                Workers = parseResult.GetValue(workers),
                MinimumCount = parseResult.GetValue(minimum),
            };
            int threadCount = parseResult.GetValue(threads);
            if (options.Workers < 1 || threadCount < 1 || options.CheckpointEvery < 0 || options.MinimumCount < 1)
            {
                stderr.WriteLine("error: --workers, --threads and --minimum-count must be at least 1; --checkpoint-every at least 0.");
                return Task.FromResult(BadInput);
            }
            if (options.LabelsFolder is not null && !Directory.Exists(options.LabelsFolder))
            {
                stderr.WriteLine($"error: labels folder '{options.LabelsFolder}' does not exist.");
                return Task.FromResult(BadInput);
            }
            try
            {
                using var local = LocalModel.Open(ModelVersion.ReadForCalibration(folder.FullName), ParallelSettings.FromThreads(threadCount));
                var frames = Calibrator.ListFrames(parseResult.GetValue(framesFolder)!.FullName);
                var calibrator = new Calibrator(local.Runner, local.Lease, new FrameDecoder(), reducerFactory, options);
                var artifact = RunWithProgress(calibrator, frames, outPath, stdout, cancel);
                stdout.WriteLine($"Calibrated on {artifact.FrameCount} frames; wrote {outPath}.");
                foreach (var c in artifact.Classes)
                    stdout.WriteLine(string.Create(CultureInfo.InvariantCulture, $"  {c.Name,-24} pixels {c.Count,12}  mean {c.Mean,9:F4}  std {c.Std,8:F4}"));
                if (artifact.FallbackClasses.Count > 0)
                    stdout.WriteLine($"  Too few pixels (pooled fallback): {string.Join(", ", artifact.FallbackClasses)}");
                return Task.FromResult(0);
            }
            catch (OperationCanceledException)
            {
                stderr.WriteLine("Stopped. Progress up to the last checkpoint is kept: run the same command again to resume.");
                return Task.FromResult(Interrupted);
            }
            catch (Strayspot.Scoring.CodedException e)
            {
                stderr.WriteLine($"error [{e.Code}]: {e.Message}");
                return Task.FromResult(BadInput);
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                stderr.WriteLine($"error: {e.Message}");
                return Task.FromResult(BadInput);
            }
        });
        return command;
    }

    private static CalibrationArtifact RunWithProgress(Calibrator calibrator, IReadOnlyList<string> frames, string outPath, TextWriter stdout, CancellationToken cancel) =>
        FrameProgress.Run("calibrating", frames.Count, stdout, progress =>
            calibrator.Run(frames, outPath, new Progress(p => progress.Report(new FrameCount(p.FramesDone, p.FramesTotal, p.ResumedFrom))), cancel)!);

    // Synchronous on purpose: Progress<T> would post to the thread pool and report out of order.
    private sealed class Progress(Action<CalibrationProgress> report) : IProgress<CalibrationProgress>
    {
        public void Report(CalibrationProgress value) => report(value);
    }
}
