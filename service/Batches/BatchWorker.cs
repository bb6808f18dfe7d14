using System.Collections.Concurrent;
using Microsoft.Extensions.Options;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Frames;
using Strayspot.Service.Hosting;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Service.Store;

namespace Strayspot.Service.Batches;

/// <summary>
/// Scores queued and running batches in the background, one frame at a time per batch, each frame through a slot of
/// the service's <see cref="FrameGate"/> (so batches and interactive requests share the same bound on cores).
/// A frame's files go to a temporary folder that is renamed into place, and only then is the frame marked done:
/// after a crash, done frames are never scored again and any other frame is scored afresh, its folder replaced.
/// On shutdown the frame in progress is finished, then the worker stops. Frames are taken by claims (see
/// <see cref="IBatchStore"/>), so any number of replicas sharing a PostgreSQL store split a batch between them.
/// </summary>
public sealed class BatchWorker(
    BatchService batches,
    BatchCallbacks callbacks,
    ModelCatalog catalog,
    ModelSessions sessions,
    FrameRunner runner,
    FrameGate gate,
    IOptions<ServiceOptions> service,
    IHostApplicationLifetime lifetime,
    ILogger<BatchWorker> log) : BackgroundService
{
    private readonly ConcurrentDictionary<string, bool> _claimed = new(StringComparer.Ordinal);
    /// <summary>Batches whose open frames other replicas hold: looked at again after the poll interval.</summary>
    private readonly ConcurrentDictionary<string, DateTimeOffset> _resting = new(StringComparer.Ordinal);
    private readonly FrameDecoder _decoder = new(new FrameDecoderOptions { MaxPixels = service.Value.MaxPixels });

    private static string Owner => ClaimOwner.ThisProcess;

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
        var backoff = TimeSpan.Zero;
        while (!stopping.IsCancellationRequested)
        {
            try
            {
                callbacks.DispatchDue(stopping);
                var batch = Claim(out bool anyRunnable);
                if (batch is null)
                {
                    if (batches.Options.ExitWhenIdle && !anyRunnable && _claimed.IsEmpty)
                    {
                        log.LogInformation("No batch work is left; stopping (Service:Batches:ExitWhenIdle)");
                        lifetime.StopApplication();
                        break;
                    }
                    try { await batches.WaitForWorkAsync(batches.Options.PollInterval, stopping); }
                    catch (OperationCanceledException) { break; }
                    continue;
                }
                batches.Wake(); // another loop may take the next batch
                try
                {
                    await RunAsync(batch, stopping);
                }
                catch (Exception e) when (e is not (OperationCanceledException or StoreUnavailableException))
                {
                    log.LogError(e, "Batch {BatchId} failed", batch.Id);
                    batches.Store.Transition(batch.Id, BatchStates.Failed, [BatchStates.Queued, BatchStates.Running], error: ClientPaths.Relative(e.Message, batches.DataRoot));
                }
                finally
                {
                    _claimed.TryRemove(batch.Id, out _);
                }
                backoff = TimeSpan.Zero;
            }
            catch (StoreUnavailableException e)
            {
                // Frames claimed meanwhile stay pending: their leases run out and whoever is up scores them.
                backoff = backoff == TimeSpan.Zero ? TimeSpan.FromMilliseconds(250) : TimeSpan.FromTicks(Math.Min(backoff.Ticks * 2, MaxBackoff.Ticks));
                log.LogWarning("The store is unavailable; trying again in {Backoff} ms: {Reason}", (int)backoff.TotalMilliseconds, e.Message);
                try { await Task.Delay(backoff, stopping); }
                catch (OperationCanceledException) { break; }
            }
        }
    }

    private static readonly TimeSpan MaxBackoff = TimeSpan.FromSeconds(5);

    private BatchRecord? Claim(out bool anyRunnable)
    {
        var now = DateTimeOffset.UtcNow;
        var runnable = batches.Store.Runnable();
        anyRunnable = runnable.Count > 0;
        foreach (var b in runnable)
        {
            if (_resting.TryGetValue(b.Id, out var until) && until > now) continue;
            if (_claimed.TryAdd(b.Id, true)) return b;
        }
        return null;
    }

    private async Task RunAsync(BatchRecord batch, CancellationToken stopping)
    {
        string folder = batches.BatchFolder(batch.Id);
        // Held for the whole run, so every frame of it is scored by one model version.
        using var model = await BorrowAsync(batch, stopping);
        if (model is null) return;
        if (!batches.Store.Transition(batch.Id, BatchStates.Running, [BatchStates.Queued, BatchStates.Running],
                modelSha256: model.Version.WeightsSha256, profileVersion: model.Version.Profile.Version))
            return; // cancelled meanwhile
        ClearInterrupted(folder);
        if (batch.State == BatchStates.Running && batch.DoneCount + batch.FailedCount > 0)
            log.LogInformation("Resuming batch {BatchId}: {Done} of {Total} frames already done", batch.Id, batch.DoneCount + batch.FailedCount, batch.FrameCount);
        var output = new FrameFolderWriter(model.Version);
        var lease = batches.Options.LeaseTime;
        using var cancel = batches.Track(batch.Id, stopping);
        try
        {
            while (!cancel.IsCancellationRequested)
            {
                // Null too when the batch is no longer running (cancelled), or when every open frame is held by another replica.
                var claim = batches.Store.ClaimNextFrame(batch.Id, Owner, lease);
                if (claim is null)
                {
                    if (!Finish(batch.Id)) _resting[batch.Id] = DateTimeOffset.UtcNow + batches.Options.PollInterval;
                    return;
                }
                FrameGate.Lease? slot;
                while ((slot = await gate.TryEnterAsync(cancel.Token)) is null)
                    await Task.Delay(TimeSpan.FromMilliseconds(100), cancel.Token);
                using (slot)
                using (var renewal = new ClaimRenewal(batches.Store, claim, lease, log))
                {
                    // Not cancellable on purpose: a frame once started is finished, so shutdown leaves no half frame behind.
                    // A recording is the exception: it can run for long, so it ends with its batch (and is scored afresh on resume).
                    await Task.Run(() => ScoreFrame(claim, folder, model, output, batch.Artifacts, renewal, cancel.Token), CancellationToken.None);
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
            try
            {
                if (batches.Store.Get(batch.Id) is { State: BatchStates.Cancelled } cancelled)
                    batches.WriteManifest(cancelled);
            }
            catch (StoreUnavailableException) { } // the replica that next sees the batch writes it
        }
    }

    private void ScoreFrame(FrameClaim claim, string folder, ModelLease model, FrameFolderWriter output, IReadOnlyList<string> artifacts,
        ClaimRenewal renewal, CancellationToken cancel)
    {
        var frame = claim.Frame;
        string name = frame.Seq.ToString("D5", System.Globalization.CultureInfo.InvariantCulture);
        string frames = Path.Combine(folder, BatchService.FramesFolder);
        string final = Path.Combine(frames, name);
        string temp = Path.Combine(frames, $".{name}.{Guid.NewGuid():N}.tmp");
        try
        {
            var scored = Score(model, output, frame, temp, artifacts, cancel);
            // Held still? Renewed just before the rename, the claim outlasts the rename and the done mark by a whole lease.
            if (renewal.Lost || !batches.Store.RenewClaim(claim, batches.Options.LeaseTime))
            {
                log.LogWarning("Batch {BatchId} frame {FrameId}: the claim was lost to another replica; its result is dropped", claim.BatchId, frame.FrameId);
                TryDelete(temp);
                return;
            }
            // A folder left by an interrupted attempt (renamed, not yet marked done) is replaced.
            if (Directory.Exists(final)) Directory.Delete(final, recursive: true);
            Directory.Move(temp, final);
            string report = $"{BatchService.FramesFolder}/{name}/{scored.ReportFile}";
            if (!batches.Store.CompleteFrame(claim, new FrameResult(scored.FrameScore, scored.RegionCount, report, Manifest.RegionsJson(scored.Regions))))
                log.LogWarning("Batch {BatchId} frame {FrameId}: the done mark was refused (claim lost)", claim.BatchId, frame.FrameId);
        }
        catch (Exception e) when (e is Strayspot.Scoring.CodedException or FileNotFoundException
                                      or DirectoryNotFoundException or InvalidDataException)
        {
            TryDelete(temp);
            string code = e is Strayspot.Scoring.CodedException coded ? coded.Code : "frame-unreadable";
            log.LogWarning("Batch {BatchId} frame {FrameId} failed ({Code}): {Reason}", claim.BatchId, frame.FrameId, code, e.Message);
            batches.Store.FailFrame(claim, $"{code}: {ClientPaths.Relative(e.Message, folder, batches.DataRoot)}");
        }
        catch
        {
            TryDelete(temp);
            throw;
        }
    }

    /// <summary>The one call into frame scoring: decode the frame's file, score it, write its outputs to <paramref name="folder"/>.</summary>
    private ScoredFrame Score(ModelLease model, FrameFolderWriter output, FrameRecord frame, string folder, IReadOnlyList<string> artifacts,
        CancellationToken cancel)
    {
        string source = batches.ResolveSource(frame.SourcePath);
        if (Recordings.VideoRecording.IsVideoFile(frame.SourcePath))
        {
            var (score, tracks) = BatchRecordings.Score(runner, model, source, folder, service.Value.MaxPixels, cancel);
            return new ScoredFrame(score, tracks.Count, tracks, Recordings.RecordingRun.TracksFile);
        }
        List<ManifestRegion>? regions = null;
        using var decoded = _decoder.DecodeFile(source);
        var report = runner.Score(model, decoded, null, (scored, timings) =>
        {
            regions = Manifest.Regions(scored, output.ClassNames);
            return output.WriteAll(scored, timings, model.Version.Defaults, frame.FrameId, folder, decoded.Image, artifacts);
        });
        return new ScoredFrame(report.FrameScore, report.Regions.Count, regions ?? [], Rendering.ArtifactWriter.ReportFile);
    }

    private sealed record ScoredFrame(float FrameScore, int RegionCount, List<ManifestRegion> Regions, string ReportFile);

    /// <summary>Running → done once no frame is open anywhere; the one replica that makes the move writes the manifest.</summary>
    private bool Finish(string batchId)
    {
        if (!batches.Store.FinishIfComplete(batchId)) return false;
        var batch = batches.Store.Get(batchId)!;
        batches.WriteManifest(batch);
        log.LogInformation("Batch {BatchId} done: {Done} frames scored, {Failed} failed", batchId, batch.DoneCount, batch.FailedCount);
        return true;
    }

    /// <summary>The model of a batch from the process's registry; null (batch failed) when it cannot be loaded.</summary>
    private async Task<ModelLease?> BorrowAsync(BatchRecord batch, CancellationToken stopping)
    {
        if (!catalog.TryGet(batch.Model, out var entry) || !entry.IsUsable)
        {
            string why = entry is null ? "it is not installed" : entry.Error ?? "it is unusable";
            batches.Store.Transition(batch.Id, BatchStates.Failed, [BatchStates.Queued, BatchStates.Running], error: $"Model '{batch.Model}' cannot be used: {why}.");
            return null;
        }
        try
        {
            // Checked when the batch was made; the model may have changed since (or another replica stored the batch):
            // fail the batch once, not each of its frames.
            ModelReadiness.EnsureCanScore(entry.Descriptor!, entry.Statistics, entry.Version!.Defaults, entry.Folder);
        }
        catch (ModelException e)
        {
            batches.Store.Transition(batch.Id, BatchStates.Failed, [BatchStates.Queued, BatchStates.Running], error: $"{e.Code}: {ClientPaths.Relative(e.Message, batches.DataRoot, service.Value.ModelsRoot)}");
            return null;
        }
        try
        {
            return await Task.Run(() => sessions.Borrow(entry), stopping);
        }
        catch (Exception e) when (e is Strayspot.Scoring.CodedException or IOException or InvalidDataException)
        {
            batches.Store.Transition(batch.Id, BatchStates.Failed, [BatchStates.Queued, BatchStates.Running], error: $"Model '{batch.Model}' cannot be loaded: {ClientPaths.Relative(e.Message, batches.DataRoot)}");
            return null;
        }
    }

    /// <summary>
    /// Removes temporary frame folders of interrupted attempts. On a shared store another replica may be writing
    /// one right now: only those untouched for several lease times are left over.
    /// </summary>
    private void ClearInterrupted(string folder)
    {
        string frames = Path.Combine(folder, BatchService.FramesFolder);
        if (!Directory.Exists(frames)) return;
        var before = DateTime.UtcNow - 4 * batches.Options.LeaseTime;
        foreach (string dir in Directory.EnumerateDirectories(frames, ".*.tmp"))
            if (!batches.Store.Shared || Directory.GetLastWriteTimeUtc(dir) < before) TryDelete(dir);
    }

    private static void TryDelete(string dir)
    {
        try { if (Directory.Exists(dir)) Directory.Delete(dir, recursive: true); }
        catch (IOException) { }
        catch (UnauthorizedAccessException) { }
    }

}
