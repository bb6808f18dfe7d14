using System.Collections.Concurrent;
using Microsoft.Extensions.Options;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Frames;
using Strayspot.Service.Hosting;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;

namespace Strayspot.Service.Batches;

/// <summary>
/// Scores queued and running batches in the background, one frame at a time per batch, each frame through a slot of
/// the service's <see cref="FrameGate"/> (so batches and interactive requests share the same bound on cores).
/// A frame's files go to a temporary folder that is renamed into place, and only then is the frame marked done:
/// after a crash, done frames are never scored again and any other frame is scored afresh, its folder replaced.
/// On shutdown the frame in progress is finished, then the worker stops.
/// </summary>
public sealed class BatchWorker(
    BatchService batches,
    BatchCallbacks callbacks,
    ModelCatalog catalog,
    FrameGate gate,
    IOptions<ServiceOptions> service,
    ILogger<BatchWorker> log) : BackgroundService
{
    private readonly ConcurrentDictionary<string, bool> _claimed = new(StringComparer.Ordinal);
    private readonly ConcurrentDictionary<string, (string Version, ModelBundle Bundle)> _bundles = new(StringComparer.Ordinal);
    private readonly SemaphoreSlim _bundleLoad = new(1, 1);
    private readonly FrameDecoder _decoder = new(new FrameDecoderOptions { MaxPixels = service.Value.MaxPixels });

    protected override async Task ExecuteAsync(CancellationToken stopping)
    {
        await Task.Yield();
        var loops = new List<Task>();
        for (int i = 0; i < batches.Options.ParallelBatches; i++) loops.Add(LoopAsync(stopping));
        await Task.WhenAll(loops);
        await callbacks.DrainAsync();
    }

    private async Task LoopAsync(CancellationToken stopping)
    {
        while (!stopping.IsCancellationRequested)
        {
            callbacks.DispatchDue(stopping);
            var batch = Claim();
            if (batch is null)
            {
                try { await batches.WaitForWorkAsync(batches.Options.PollInterval, stopping); }
                catch (OperationCanceledException) { break; }
                continue;
            }
            batches.Wake(); // another loop may take the next batch
            try
            {
                await RunAsync(batch, stopping);
            }
            catch (Exception e) when (e is not OperationCanceledException)
            {
                log.LogError(e, "Batch {BatchId} failed", batch.Id);
                batches.Store.Transition(batch.Id, BatchStates.Failed, [BatchStates.Queued, BatchStates.Running], error: e.Message);
            }
            finally
            {
                _claimed.TryRemove(batch.Id, out _);
            }
        }
    }

    private BatchRecord? Claim()
    {
        foreach (var b in batches.Store.Runnable())
            if (_claimed.TryAdd(b.Id, true)) return b;
        return null;
    }

    private async Task RunAsync(BatchRecord batch, CancellationToken stopping)
    {
        string folder = batches.BatchFolder(batch.Id);
        var bundle = await BundleAsync(batch, stopping);
        if (bundle is null) return;
        if (!batches.Store.Transition(batch.Id, BatchStates.Running, [BatchStates.Queued, BatchStates.Running],
                modelSha256: bundle.Model.ModelSha256, profileVersion: bundle.Profile.Version))
            return; // cancelled meanwhile
        ClearInterrupted(folder);
        if (batch.State == BatchStates.Running)
            log.LogInformation("Resuming batch {BatchId}: {Done} of {Total} frames already done", batch.Id, batch.DoneCount + batch.FailedCount, batch.FrameCount);
        var output = new FrameOutput(bundle);
        using var cancel = batches.Track(batch.Id, stopping);
        try
        {
            while (!cancel.IsCancellationRequested)
            {
                if (batches.Store.Get(batch.Id)?.State != BatchStates.Running) return;
                var frame = batches.Store.StartNextFrame(batch.Id);
                if (frame is null)
                {
                    Finish(batch.Id);
                    return;
                }
                FrameGate.Lease? lease;
                while ((lease = await gate.TryEnterAsync(cancel.Token)) is null)
                    await Task.Delay(TimeSpan.FromMilliseconds(100), cancel.Token);
                using (lease)
                {
                    // Not cancellable on purpose: a frame once started is finished, so shutdown leaves no half frame behind.
                    // A recording is the exception: it can run for long, so it ends with its batch (and is scored afresh on resume).
                    await Task.Run(() => ScoreFrame(batch.Id, folder, frame, output, cancel.Token), CancellationToken.None);
                }
                if (batches.Options.PauseBetweenFrames > TimeSpan.Zero)
                    await Task.Delay(batches.Options.PauseBetweenFrames, cancel.Token);
            }
        }
        catch (OperationCanceledException) when (cancel.IsCancellationRequested)
        {
            // Cancelled or stopping: the state is already stored.
        }
        finally
        {
            batches.Untrack(batch.Id);
            if (batches.Store.Get(batch.Id) is { State: BatchStates.Cancelled } cancelled)
                batches.WriteManifest(cancelled);
        }
    }

    private void ScoreFrame(string batchId, string folder, FrameRecord frame, FrameOutput output, CancellationToken cancel)
    {
        string name = frame.Seq.ToString("D5", System.Globalization.CultureInfo.InvariantCulture);
        string frames = Path.Combine(folder, BatchService.FramesFolder);
        string final = Path.Combine(frames, name);
        string temp = Path.Combine(frames, $".{name}.{Guid.NewGuid():N}.tmp");
        try
        {
            List<ManifestRegion>? regions = null;
            float score;
            int regionCount;
            string reportFile = FrameOutput.ReportFile;
            if (Recordings.VideoRecording.IsVideoFile(frame.SourcePath))
            {
                (score, regions) = BatchRecordings.Score(output.Bundle, batches.ResolveSource(frame.SourcePath), temp, service.Value.MaxPixels, cancel);
                regionCount = regions.Count;
                reportFile = Recordings.RecordingRun.TracksFile;
            }
            else
            {
                using var decoded = _decoder.DecodeFile(batches.ResolveSource(frame.SourcePath));
                var report = output.Write(decoded, frame.FrameId, temp, inspect: s => regions = Manifest.Regions(s, output.ClassNames));
                score = report.FrameScore;
                regionCount = report.Regions.Count;
            }
            // A folder left by an interrupted attempt (renamed, not yet marked done) is replaced.
            if (Directory.Exists(final)) Directory.Delete(final, recursive: true);
            Directory.Move(temp, final);
            string report_ = $"{BatchService.FramesFolder}/{name}/{reportFile}";
            batches.Store.CompleteFrame(batchId, frame.Seq, new FrameResult(score, regionCount, report_, Manifest.RegionsJson(regions ?? [])));
        }
        catch (Exception e) when (e is ModelException or ScoringInputException or UnsafePathException or FileNotFoundException
                                      or DirectoryNotFoundException or InvalidDataException)
        {
            TryDelete(temp);
            string code = e switch { ModelException m => m.Code, ScoringInputException s => s.Code, UnsafePathException => "path-outside-data", _ => "frame-unreadable" };
            log.LogWarning("Batch {BatchId} frame {FrameId} failed ({Code}): {Reason}", batchId, frame.FrameId, code, e.Message);
            batches.Store.FailFrame(batchId, frame.Seq, $"{code}: {e.Message}");
        }
        catch
        {
            TryDelete(temp);
            throw;
        }
    }

    private void Finish(string batchId)
    {
        if (!batches.Store.Transition(batchId, BatchStates.Done, [BatchStates.Running])) return;
        var batch = batches.Store.Get(batchId)!;
        batches.WriteManifest(batch);
        log.LogInformation("Batch {BatchId} done: {Done} frames scored, {Failed} failed", batchId, batch.DoneCount, batch.FailedCount);
    }

    /// <summary>The model of a batch, loaded once per profile version; null (batch failed) when it cannot be loaded.</summary>
    private async Task<ModelBundle?> BundleAsync(BatchRecord batch, CancellationToken stopping)
    {
        if (!catalog.TryGet(batch.Model, out var entry) || !entry.IsUsable)
        {
            string why = entry is null ? "it is not installed" : entry.Error ?? "it is unusable";
            batches.Store.Transition(batch.Id, BatchStates.Failed, [BatchStates.Queued, BatchStates.Running], error: $"Model '{batch.Model}' cannot be used: {why}.");
            return null;
        }
        await _bundleLoad.WaitAsync(stopping);
        try
        {
            if (_bundles.TryGetValue(batch.Model, out var cached) && cached.Version == entry.Profile.Version) return cached.Bundle;
            int threads = service.Value.IntraOpThreads > 0 ? service.Value.IntraOpThreads : Environment.ProcessorCount;
            try
            {
                var bundle = await Task.Run(() => ModelBundle.Load(entry.Folder, new ModelRuntimeOptions { IntraOpThreads = threads }), stopping);
                // The old bundle may still score a frame of another batch: leave it to the finalizer rather than dispose it mid-run.
                _bundles[batch.Model] = (entry.Profile.Version, bundle);
                return bundle;
            }
            catch (Exception e) when (e is ModelException or ScoringInputException or IOException or InvalidDataException)
            {
                batches.Store.Transition(batch.Id, BatchStates.Failed, [BatchStates.Queued, BatchStates.Running], error: $"Model '{batch.Model}' cannot be loaded: {e.Message}");
                return null;
            }
        }
        finally
        {
            _bundleLoad.Release();
        }
    }

    private static void ClearInterrupted(string folder)
    {
        string frames = Path.Combine(folder, BatchService.FramesFolder);
        if (!Directory.Exists(frames)) return;
        foreach (string dir in Directory.EnumerateDirectories(frames, ".*.tmp")) TryDelete(dir);
    }

    private static void TryDelete(string dir)
    {
        try { if (Directory.Exists(dir)) Directory.Delete(dir, recursive: true); }
        catch (IOException) { }
        catch (UnauthorizedAccessException) { }
    }

    public override void Dispose()
    {
        foreach (var (_, b) in _bundles.Values) b.Dispose();
        _bundles.Clear();
        _bundleLoad.Dispose();
        base.Dispose();
    }
}
