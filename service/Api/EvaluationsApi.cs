using System.Text.Json.Serialization;
using Microsoft.AspNetCore.Http.HttpResults;
using Strayspot.Service.Evaluation;
using Strayspot.Service.Hosting;

namespace Strayspot.Service.Api;

/// <summary>Evaluate a model on a labeled dataset under the data root.</summary>
public sealed record EvaluationRequest(
    [property: JsonPropertyName("dataset")] string? Dataset,
    [property: JsonPropertyName("exact")] bool Exact = false,
    [property: JsonPropertyName("targetTpr")] double? TargetTpr = null,
    [property: JsonPropertyName("targetFpr")] double? TargetFpr = null);

/// <summary>Evaluation jobs: start one, follow it, fetch its tables and plots.</summary>
public static class EvaluationsApi
{
    public static void MapEvaluationsApi(this RouteGroupBuilder v1)
    {
        var ofModel = v1.MapGroup("/models/{model}/evaluations").WithTags("Evaluations");
        var evaluations = v1.MapGroup("/evaluations").WithTags("Evaluations");
        ofModel.MapPost("", Start)
            .WithSummary("Measures all seven scoring methods on a labeled dataset and recommends a threshold.")
            .Produces<EvaluationJob>(StatusCodes.Status202Accepted)
            .ProducesProblem(StatusCodes.Status400BadRequest)
            .ProducesProblem(StatusCodes.Status404NotFound);
        evaluations.MapGet("", (EvaluationJobs jobs) => TypedResults.Ok(jobs.List()));
        evaluations.MapGet("/{id}", Results<Ok<EvaluationJob>, ProblemHttpResult> (string id, EvaluationJobs jobs) =>
                jobs.TryGet(id, out var job) ? TypedResults.Ok(job) : JobNotFound(id));
        evaluations.MapGet("/{id}/files/{name}", Results<PhysicalFileHttpResult, ProblemHttpResult> (string id, string name, EvaluationJobs jobs) =>
            {
                if (!jobs.TryGet(id, out var job)) return JobNotFound(id);
                if (job.State != "done")
                    return ApiProblems.Create(ErrorCodes.JobNotFinished, $"Evaluation {id} is {job.State}; its files come when it is done.");
                return jobs.FileOf(job, name) is { } path
                    ? TypedResults.PhysicalFile(path, ContentTypes.Of(path))
                    : ApiProblems.Create(ErrorCodes.NotFound, $"Evaluation {id} has no file '{name}'; its files are {string.Join(", ", EvaluationJobs.OutputFiles)}.");
            });
    }

    private static Results<Accepted<EvaluationJob>, ProblemHttpResult> Start(string model, EvaluationRequest request,
        ModelCatalog catalog, EvaluationJobs jobs)
    {
        if (!catalog.TryGet(model, out var entry)) return ApiProblems.ModelNotFound(model);
        if (string.IsNullOrWhiteSpace(request.Dataset))
            return ApiProblems.Validation(new Dictionary<string, string[]> { ["dataset"] = ["A dataset folder under the data root is required."] });
        var job = jobs.Start(entry, request.Dataset, new EvaluationSettings
        {
            Exact = request.Exact,
            TargetTpr = request.TargetTpr ?? 0.95,
            TargetFpr = request.TargetFpr,
        });
        return TypedResults.Accepted($"/v1/evaluations/{job.Id}", job);
    }

    private static ProblemHttpResult JobNotFound(string id) =>
        ApiProblems.Create(ErrorCodes.JobNotFound, $"No evaluation job '{id}'; GET /v1/evaluations lists them.");
}
