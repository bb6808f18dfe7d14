using System.Text.Json.Serialization;
using Microsoft.Extensions.Options;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Cli;
using Strayspot.Service.Hosting;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;

namespace Strayspot.Service.Evaluation;

/// <summary>One evaluation of a model on a labeled dataset under the data root, as the service keeps it.</summary>
public sealed record EvaluationJob : IStoredJob
{
    [JsonPropertyName("id")] public string Id { get; init; } = "";
    [JsonPropertyName("model")] public string Model { get; init; } = "";
    /// <summary>Relative to the data root.</summary>
    [JsonPropertyName("dataset")] public string Dataset { get; init; } = "";
    [JsonPropertyName("exact")] public bool Exact { get; init; }
    [JsonPropertyName("targetTpr")] public double TargetTpr { get; init; } = 0.95;
    [JsonPropertyName("targetFpr")] public double? TargetFpr { get; init; }
    /// <summary>queued, running, done, failed.</summary>
    [JsonPropertyName("state")] public string State { get; init; } = "queued";
    [JsonPropertyName("framesDone")] public int FramesDone { get; init; }
    [JsonPropertyName("framesTotal")] public int FramesTotal { get; init; }
    [JsonPropertyName("error")] public string? Error { get; init; }
    [JsonPropertyName("createdUtc")] public DateTimeOffset CreatedUtc { get; init; }
    [JsonPropertyName("finishedUtc")] public DateTimeOffset? FinishedUtc { get; init; }
    /// <summary>Output name → link, once done.</summary>
    [JsonPropertyName("files")] public Dictionary<string, string>? Files { get; init; }
}

/// <summary>
/// Evaluations as durable background jobs: one at a time per replica, records in the store (every replica sees
/// every job), outputs under the data root. An evaluation keeps no checkpoint, so a job that was running when its
/// replica stopped starts again from its first frame (there, or on another replica).
/// </summary>
public sealed class EvaluationJobs(IOptions<ServiceOptions> options, ModelCatalog catalog, ModelSessions sessions, FrameRunner runner,
    Batches.BatchService batches, ILogger<EvaluationJobs> log) : BackgroundService
{
    public const string Kind = "evaluation";

    public static readonly IReadOnlyList<string> OutputFiles =
    [
        EvaluationOutputs.MarkdownFile, EvaluationOutputs.CsvFile, EvaluationOutputs.JsonFile, EvaluationOutputs.FramesFile,
        EvaluationOutputs.RocFile, EvaluationOutputs.PrecisionRecallFile,
    ];

    private readonly JobFolder<EvaluationJob> _jobs = new(batches.Database.Jobs, Kind,
        Path.Combine(Path.GetFullPath(options.Value.DataRoot), ".strayspot", "evaluations"), batches.Options.LeaseTime, batches.Options.PollInterval);

    public IReadOnlyList<EvaluationJob> List() => _jobs.All;

    public bool TryGet(string id, out EvaluationJob job) => _jobs.TryGet(id, out job);

    /// <summary>The path of a finished job's output file, or null.</summary>
    public string? FileOf(EvaluationJob job, string name) =>
        job.State == "done" && OutputFiles.Contains(name) && File.Exists(Path.Combine(_jobs.FolderOf(job.Id), "out", name))
            ? Path.Combine(_jobs.FolderOf(job.Id), "out", name) : null;

    /// <summary>Checks the dataset now (every problem listed at once) and queues the job.</summary>
    public EvaluationJob Start(CatalogEntry model, string dataset, EvaluationSettings settings)
    {
        Evaluator.Validate(settings);
        var opened = EvaluationDataset.Open(SafePath.Resolve(options.Value.DataRoot, dataset), model.Descriptor?.Classes.Count);
        var job = new EvaluationJob
        {
            Id = Guid.NewGuid().ToString("N"),
            Model = model.Name,
            Dataset = dataset,
            Exact = settings.Exact,
            TargetTpr = settings.TargetTpr,
            TargetFpr = settings.TargetFpr,
            FramesTotal = opened.Items.Count,
            CreatedUtc = DateTimeOffset.UtcNow,
        };
        _jobs.Add(job);
        return job;
    }

    protected override Task ExecuteAsync(CancellationToken stop) =>
        batches.Options.WorkerOnly ? Task.CompletedTask : _jobs.RunAsync(RunJob, log, stop);

    private void RunJob(EvaluationJob job, JobClaim<EvaluationJob> claim)
    {
        try
        {
            if (!catalog.TryGet(job.Model, out var entry) || !entry.IsUsable)
                throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model '{job.Model}' is not installed or not usable.");
            job = claim.Save(job with { State = "running", FramesDone = 0 });
            var running = job;
            var settings = new EvaluationSettings { Exact = job.Exact, TargetTpr = job.TargetTpr, TargetFpr = job.TargetFpr };
            using var model = sessions.Borrow(entry);
            var dataset = EvaluationDataset.Open(SafePath.Resolve(options.Value.DataRoot, job.Dataset), model.Version.ClassCount);
            Evaluator.Run(runner, model, dataset, Path.Combine(_jobs.FolderOf(job.Id), "out"),
                settings, new Progress(p => running = claim.Save(running with { FramesDone = p.Done, FramesTotal = p.Total })));
            claim.Finish(running with
            {
                State = "done",
                FinishedUtc = DateTimeOffset.UtcNow,
                Files = OutputFiles.ToDictionary(f => f, f => $"/v1/evaluations/{job.Id}/files/{f}"),
            });
        }
        catch (Exception e) when (e is Strayspot.Scoring.CodedException or IOException)
        {
            claim.Finish(job with { State = "failed", Error = ClientPaths.Relative(e.Message, options.Value.DataRoot), FinishedUtc = DateTimeOffset.UtcNow });
            log.LogWarning("Evaluation {JobId} of {Model} failed: {Reason}", job.Id, job.Model, e.Message);
        }
    }

    private sealed class Progress(Action<FrameCount> report) : IProgress<FrameCount>
    {
        public void Report(FrameCount value) => report(value);
    }
}
