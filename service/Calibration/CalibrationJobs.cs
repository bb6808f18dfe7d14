using Strayspot.Service.Batches;
using System.Text.Json;
using System.Text.Json.Serialization;
using Microsoft.Extensions.Options;
using Strayspot.Service.Frames;
using Strayspot.Service.Hosting;
using Strayspot.Service.Models;

namespace Strayspot.Service.Calibration;

/// <summary>One calibration run over a folder of the user's in-distribution frames, as the service keeps it.</summary>
public sealed record CalibrationJob : IStoredJob
{
    [JsonPropertyName("id")] public string Id { get; init; } = "";
    [JsonPropertyName("model")] public string Model { get; init; } = "";
    [JsonPropertyName("modelSha256")] public string ModelSha256 { get; init; } = "";
    /// <summary>Relative to the data root.</summary>
    [JsonPropertyName("folder")] public string Folder { get; init; } = "";
    [JsonPropertyName("labelsFolder")] public string? LabelsFolder { get; init; }
    [JsonPropertyName("ignoreLabel")] public int IgnoreLabel { get; init; } = 255;
    /// <summary>queued, running, done, failed, activated.</summary>
    [JsonPropertyName("state")] public string State { get; init; } = "queued";
    [JsonPropertyName("framesDone")] public int FramesDone { get; init; }
    [JsonPropertyName("framesTotal")] public int FramesTotal { get; init; }
    [JsonPropertyName("error")] public string? Error { get; init; }
    [JsonPropertyName("createdUtc")] public DateTimeOffset CreatedUtc { get; init; }
    [JsonPropertyName("finishedUtc")] public DateTimeOffset? FinishedUtc { get; init; }
    [JsonPropertyName("fallbackClasses")] public IReadOnlyList<string>? FallbackClasses { get; init; }
}

/// <summary>
/// Calibration jobs: one runs at a time per replica in the background; records live in the store (every replica
/// sees every job), checkpoints under the data root, so a job resumes where its last checkpoint left it after a
/// restart, or on another replica once the one running it has died. Activating a finished job copies its
/// calibration into the model folder and reloads the catalog.
/// </summary>
public sealed class CalibrationJobs(IOptions<ServiceOptions> options, ModelCatalog catalog, ModelSessions sessions,
    Inference.FrameRunner runner, FrameDecoder decoder, BatchService batches, ILogger<CalibrationJobs> log) : BackgroundService
{
    public const string Kind = "calibration";

    private readonly JobFolder<CalibrationJob> _jobs = new(batches.Database.Jobs, Kind,
        Path.Combine(Path.GetFullPath(options.Value.DataRoot), ".strayspot", "calibrations"), batches.Options.LeaseTime, batches.Options.PollInterval);

    public IReadOnlyList<CalibrationJob> List() => _jobs.All;

    public bool TryGet(string id, out CalibrationJob job) => _jobs.TryGet(id, out job);

    /// <summary>Queues a job; <paramref name="folder"/> and <paramref name="labels"/> are relative to the data root.</summary>
    public CalibrationJob Start(CatalogEntry model, string folder, string? labels, int ignoreLabel)
    {
        string frames = SafePath.Resolve(options.Value.DataRoot, folder);
        var list = Calibrator.ListFrames(frames);
        if (labels is not null && !Directory.Exists(SafePath.Resolve(options.Value.DataRoot, labels)))
            throw new PathException(PathErrorCodes.FolderNotFound, $"Labels folder '{labels}' does not exist under the data root.");
        var job = new CalibrationJob
        {
            Id = Guid.NewGuid().ToString("N"),
            Model = model.Name,
            ModelSha256 = model.Sha256 ?? "",
            Folder = folder,
            LabelsFolder = labels,
            IgnoreLabel = ignoreLabel,
            FramesTotal = list.Count,
            CreatedUtc = DateTimeOffset.UtcNow,
        };
        _jobs.Add(job);
        return job;
    }

    /// <summary>Copies a finished job's calibration into its model's folder (atomically) and reloads the models.</summary>
    public CalibrationJob Activate(CalibrationJob job)
    {
        if (job.State is not ("done" or "activated"))
            throw new InvalidOperationException($"Calibration {job.Id} is {job.State}; only a finished calibration can be activated.");
        if (!catalog.TryGet(job.Model, out var entry))
            throw new ModelException(ModelErrorCodes.CalibrationInvalid, $"Model '{job.Model}' is no longer installed.");
        if (entry.Sha256 != job.ModelSha256)
            throw new ModelException(ModelErrorCodes.CalibrationModelMismatch,
                $"Calibration {job.Id} was measured through model {job.ModelSha256}, but '{job.Model}' is now {entry.Sha256}.");
        byte[] artifact = File.ReadAllBytes(ArtifactPath(job.Id));
        AtomicFile.WriteAllBytes(Path.Combine(entry.Folder, CalibrationArtifact.FileName), artifact);
        catalog.Reload();
        sessions.Sync();
        var activated = job with { State = "activated" };
        if (!_jobs.Update(activated))
            throw new InvalidOperationException($"Calibration {job.Id} is being written by another replica; try again.");
        return activated;
    }

    protected override Task ExecuteAsync(CancellationToken stop) =>
        batches.Options.WorkerOnly ? Task.CompletedTask : _jobs.RunAsync((job, claim) => RunJob(job, claim, stop), log, stop);

    private void RunJob(CalibrationJob job, JobClaim<CalibrationJob> claim, CancellationToken stop)
    {
        try
        {
            if (!catalog.TryGet(job.Model, out var entry) || entry.Sha256 != job.ModelSha256)
                throw new ModelException(ModelErrorCodes.CalibrationModelMismatch, $"Model '{job.Model}' changed or was removed before its calibration ran.");
            using var model = sessions.Borrow(entry);
            var frames = Calibrator.ListFrames(SafePath.Resolve(options.Value.DataRoot, job.Folder));
            job = claim.Save(job with { State = "running", FramesTotal = frames.Count });
            var calibrator = new Calibrator(runner, model, decoder, () => new PixelReductionMaxLogitReducer(), new CalibrationOptions
            {
                CheckpointEvery = 10,
                CheckpointPath = Path.Combine(_jobs.FolderOf(job.Id), "checkpoint.json"),
                LabelsFolder = job.LabelsFolder is null ? null : SafePath.Resolve(options.Value.DataRoot, job.LabelsFolder),
                IgnoreLabel = job.IgnoreLabel,
            });
            var running = job;
            var artifact = calibrator.Run(frames, ArtifactPath(job.Id),
                new Progress(p => running = claim.Save(running with { FramesDone = p.FramesDone })), stop);
            job = claim.Finish(running with
            {
                State = "done",
                FramesDone = frames.Count,
                FinishedUtc = DateTimeOffset.UtcNow,
                FallbackClasses = artifact?.FallbackClasses,
            });
            log.LogInformation("Calibration {JobId} of {Model} done over {Frames} frames", job.Id, job.Model, frames.Count);
        }
        catch (OperationCanceledException)
        {
            // Shutting down: the checkpoint is kept and the job resumes at the next start, or on another replica.
        }
        catch (Exception e) when (e is Strayspot.Scoring.CodedException or IOException)
        {
            claim.Finish(job with { State = "failed", Error = ClientPaths.Relative(e.Message, options.Value.DataRoot), FinishedUtc = DateTimeOffset.UtcNow });
            log.LogWarning("Calibration {JobId} of {Model} failed: {Reason}", job.Id, job.Model, e.Message);
        }
    }

    private string ArtifactPath(string id) => Path.Combine(_jobs.FolderOf(id), CalibrationArtifact.FileName);

    private sealed class Progress(Action<CalibrationProgress> report) : IProgress<CalibrationProgress>
    {
        public void Report(CalibrationProgress value) => report(value);
    }
}
