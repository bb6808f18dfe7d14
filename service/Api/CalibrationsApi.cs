using System.Text.Json.Serialization;
using Microsoft.AspNetCore.Http.HttpResults;
using Microsoft.Extensions.Options;
using Strayspot.Service.Batches;
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
    public static void MapCalibrationsApi(this RouteGroupBuilder v1)
    {
        var ofModel = v1.MapGroup("/models/{model}/calibrations").WithTags("Calibrations");
        var calibrations = v1.MapGroup("/calibrations").WithTags("Calibrations");
        ofModel.MapPost("", Start)
            .WithSummary("Starts measuring the model's per-class max-logit statistics over a folder of ordinary frames.")
            .RequireAuthorization(ApiPolicies.Admin)
            .Produces<CalibrationJob>(StatusCodes.Status202Accepted)
            .Accepts<CalibrationRequest>("application/json", "multipart/form-data")
            .ProducesProblem(StatusCodes.Status400BadRequest)
            .ProducesProblem(StatusCodes.Status404NotFound)
            .ProducesProblem(StatusCodes.Status413PayloadTooLarge)
            .DisableAntiforgery();
        calibrations.MapGet("", (CalibrationJobs jobs) => TypedResults.Ok(jobs.List()));
        calibrations.MapGet("/{id}", Results<Ok<CalibrationJob>, ProblemHttpResult> (string id, CalibrationJobs jobs) =>
                jobs.TryGet(id, out var job) ? TypedResults.Ok(job) : JobNotFound(id));
        calibrations.MapPost("/{id}/activate", Results<Ok<CalibrationJob>, ProblemHttpResult> (string id, CalibrationJobs jobs) =>
            {
                if (!jobs.TryGet(id, out var job)) return JobNotFound(id);
                if (job.State is not ("done" or "activated"))
                    return ApiProblems.Create(ErrorCodes.JobNotFinished, $"Calibration {id} is {job.State}; activate it once it is done.");
                return TypedResults.Ok(jobs.Activate(job));
            })
            .WithSummary("Makes a finished calibration the model's own (writes calibration.json and reloads).")
            .RequireAuthorization(ApiPolicies.Admin);
    }

    /// <summary>JSON names a folder under the data root; multipart uploads a .zip or .tar of frames as part 'file'.</summary>
    private static async Task<Results<Accepted<CalibrationJob>, ProblemHttpResult>> Start(string model, HttpRequest http,
        ModelCatalog catalog, CalibrationJobs jobs, IOptions<ServiceOptions> options, IOptions<BatchOptions> archives, CancellationToken ct)
    {
        if (!catalog.TryGet(model, out var entry)) return ApiProblems.ModelNotFound(model);
        CalibrationRequest? request;
        if (http.HasJsonContentType())
        {
            try { request = await http.ReadFromJsonAsync<CalibrationRequest>(ct); }
            catch (System.Text.Json.JsonException e) { return ApiProblems.Create(ErrorCodes.BadRequest, $"The body is not valid JSON: {e.Message}"); }
        }
        else if (http.HasFormContentType)
        {
            var (form, problem) = await UploadForm.ReadAsync(http, BatchesApi.ArchivePart, ".zip or .tar archive of frames", [], ct);
            if (form is null) return problem!;
            request = new CalibrationRequest(await Unpack(form.Files.GetFile(BatchesApi.ArchivePart)!, options.Value, archives.Value, ct));
        }
        else
            return ApiProblems.Create(ErrorCodes.UnsupportedMediaType, "Send application/json naming a folder, or multipart/form-data with an archive.");
        if (string.IsNullOrWhiteSpace(request?.Folder))
            return ApiProblems.Validation(new Dictionary<string, string[]> { ["folder"] = ["A frames folder under the data root is required."] });
        if (request.IgnoreLabel is < 0 or > 65535)
            return ApiProblems.Validation(new Dictionary<string, string[]> { ["ignoreLabel"] = ["The ignore label must be 0..65535."] });
        var job = jobs.Start(entry, request.Folder, request.LabelsFolder, request.IgnoreLabel ?? 255);
        return TypedResults.Accepted($"/v1/calibrations/{job.Id}", job);
    }

    /// <summary>Extracts an uploaded archive (checked for escapes and size bombs) into one flat folder under the data root.</summary>
    private static async Task<string> Unpack(IFormFile file, ServiceOptions service, BatchOptions limits, CancellationToken ct)
    {
        string relative = Path.Combine(".strayspot", "calibration-uploads", Guid.NewGuid().ToString("N"));
        string folder = Path.Combine(Path.GetFullPath(service.DataRoot), relative);
        string staging = folder + ".staging";
        string upload = folder + ".upload";
        Directory.CreateDirectory(folder);
        try
        {
            await using (var target = File.Create(upload)) await file.CopyToAsync(target, ct);
            var entries = BatchArchive.Extract(upload, file.FileName, staging, new ArchiveLimits(limits.MaxArchiveEntries, limits.MaxArchiveBytes));
            // The calibrator reads one folder: frames in subfolders are brought up, their path kept in the name.
            foreach (string rel in entries)
                File.Move(Path.Combine(staging, rel), Path.Combine(folder, rel.Replace('/', '_').Replace('\\', '_')));
            return relative;
        }
        finally
        {
            File.Delete(upload);
            if (Directory.Exists(staging)) Directory.Delete(staging, recursive: true);
        }
    }

    private static ProblemHttpResult JobNotFound(string id) =>
        ApiProblems.Create(ErrorCodes.JobNotFound, $"No calibration job '{id}'; GET /v1/calibrations lists them.");
}
