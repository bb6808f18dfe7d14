using System.Text.Json.Serialization;
using Microsoft.AspNetCore.Http.HttpResults;
using Strayspot.Service.Calibration;
using Strayspot.Service.Hosting;

namespace Strayspot.Service.Api;

/// <summary>Start a calibration from a folder of in-distribution frames under the data root.</summary>
public sealed record CalibrationRequest(
    [property: JsonPropertyName("folder")] string? Folder,
    [property: JsonPropertyName("labelsFolder")] string? LabelsFolder = null,
    [property: JsonPropertyName("ignoreLabel")] int? IgnoreLabel = null);

/// <summary>Calibration jobs: start one per model, follow its progress, activate the result.</summary>
public static class CalibrationsApi
{
    public static void Map(RouteGroupBuilder v1)
    {
        v1.MapPost("/models/{model}/calibrations", Start)
            .WithTags("Calibrations")
            .WithSummary("Starts measuring the model's per-class max-logit statistics over a folder of ordinary frames.")
            .RequireAuthorization(ApiPolicies.Admin)
            .Produces<CalibrationJob>(StatusCodes.Status202Accepted)
            .ProducesProblem(StatusCodes.Status400BadRequest)
            .ProducesProblem(StatusCodes.Status404NotFound);
        v1.MapGet("/calibrations", (CalibrationJobs jobs) => TypedResults.Ok(jobs.List())).WithTags("Calibrations");
        v1.MapGet("/calibrations/{id}", Results<Ok<CalibrationJob>, ProblemHttpResult> (string id, CalibrationJobs jobs) =>
                jobs.TryGet(id, out var job) ? TypedResults.Ok(job) : JobNotFound(id))
            .WithTags("Calibrations");
        v1.MapPost("/calibrations/{id}/activate", Results<Ok<CalibrationJob>, ProblemHttpResult> (string id, CalibrationJobs jobs) =>
            {
                if (!jobs.TryGet(id, out var job)) return JobNotFound(id);
                if (job.State is not ("done" or "activated"))
                    return ApiProblems.Create(ErrorCodes.JobNotFinished, $"Calibration {id} is {job.State}; activate it once it is done.");
                return TypedResults.Ok(jobs.Activate(job));
            })
            .WithTags("Calibrations")
            .WithSummary("Makes a finished calibration the model's own (writes calibration.json and reloads).")
            .RequireAuthorization(ApiPolicies.Admin);
    }

    private static Results<Accepted<CalibrationJob>, ProblemHttpResult> Start(string model, CalibrationRequest request,
        ModelCatalog catalog, CalibrationJobs jobs)
    {
        if (!catalog.TryGet(model, out var entry)) return ApiProblems.ModelNotFound(model);
        if (string.IsNullOrWhiteSpace(request.Folder))
            return ApiProblems.Validation(new Dictionary<string, string[]> { ["folder"] = ["A frames folder under the data root is required."] });
        if (request.IgnoreLabel is < 0 or > 65535)
            return ApiProblems.Validation(new Dictionary<string, string[]> { ["ignoreLabel"] = ["The ignore label must be 0..65535."] });
        var job = jobs.Start(entry, request.Folder, request.LabelsFolder, request.IgnoreLabel ?? 255);
        return TypedResults.Accepted($"/v1/calibrations/{job.Id}", job);
    }

    private static ProblemHttpResult JobNotFound(string id) =>
        ApiProblems.Create(ErrorCodes.JobNotFound, $"No calibration job '{id}'; GET /v1/calibrations lists them.");
}
