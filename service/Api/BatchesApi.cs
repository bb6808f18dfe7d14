using System.Text.Json;
using System.Text.Json.Serialization;
using Microsoft.AspNetCore.Http.HttpResults;
using Strayspot.Service.Batches;
using Strayspot.Service.Hosting;
using Strayspot.Service.Review;

namespace Strayspot.Service.Api;

/// <summary>Body of <c>POST /v1/batches</c> as JSON: frames from a folder under the data folder.</summary>
public sealed record BatchRequest(
    [property: JsonPropertyName("model")] string? Model,
    [property: JsonPropertyName("folder")] string? Folder,
    [property: JsonPropertyName("batchId")] string? BatchId,
    [property: JsonPropertyName("callbackUrl")] string? CallbackUrl,
    [property: JsonPropertyName("artifacts")] string? Artifacts = null);

public sealed record BatchSubmitted(
    [property: JsonPropertyName("batch")] BatchView Batch,
    [property: JsonPropertyName("created")] bool Created,
    [property: JsonPropertyName("framesAdded")] int FramesAdded);

public sealed record BatchList([property: JsonPropertyName("batches")] IReadOnlyList<BatchView> Batches);

public sealed record BatchFrameList([property: JsonPropertyName("frames")] IReadOnlyList<FrameView> Frames);

/// <summary>Durable batches: submit a folder or an archive of frames, follow progress, fetch the ranked manifest, cancel.</summary>
public static class BatchesApi
{
    private static readonly string[] ListableStates =
        [BatchStates.Queued, BatchStates.Running, BatchStates.Done, BatchStates.Cancelled, BatchStates.Failed];

    private static readonly JsonSerializerOptions RequestJson = new(JsonSerializerDefaults.Web);
    public const string ArchivePart = "file";
    private static readonly string[] ArchiveFields = ["model", "batchId", "callbackUrl", "artifacts"];

    /// <summary>The batch store, worker and callback sender (settings: section Service:Batches).</summary>
    public static void AddServices(IServiceCollection services, IConfiguration configuration)
    {
        // Checked when the host starts, like ServiceOptions: a bad setting stops `serve` with its name, not the first batch.
        services.AddOptions<BatchOptions>().Bind(configuration.GetSection(BatchOptions.Section))
            .ValidateOnStart();
        services.AddSingleton<Microsoft.Extensions.Options.IValidateOptions<BatchOptions>>(new BatchOptionsValidator());
        services.AddOptions<Store.StoreOptions>().Bind(configuration.GetSection(Store.StoreOptions.Section));
        services.AddSingleton<BatchService>();
        services.AddSingleton<BatchCallbacks>();
        services.AddHostedService<BatchWorker>();
    }

    public static void MapBatchesApi(this RouteGroupBuilder v1)
    {
        var group = v1.MapGroup("/batches").WithTags("Batches");

        group.MapPost("", SubmitAsync)
            .WithName("SubmitBatch")
            .WithSummary("Queues a batch: JSON {model, folder, batchId?, callbackUrl?, artifacts?} for a folder under the data folder, or multipart " +
                         "(fields model, batchId?, callbackUrl?, artifacts?, file: .zip/.tar). Re-submitting a batch id adds only frames it lacks.")
            .WithDescription("artifacts: what each frame gets besides report.json, as score --artifacts takes it: a comma list of " +
                             string.Join(", ", Rendering.ArtifactWriter.All) + ", or all or none; default " + string.Join(",", Rendering.ArtifactChoice.Lean) +
                             ". Artifacts not asked for are not written. A model whose scoring profile cannot run (sml without class statistics, " +
                             "a method that needs logits on a probabilities model, a calibration of other preprocessing) is refused here, before anything is stored.")
            .Accepts<BatchRequest>("application/json", "multipart/form-data")
            .ProducesProblem(400).ProducesProblem(404).ProducesProblem(409).ProducesProblem(413).ProducesProblem(415);

        group.MapGet("", Results<Ok<BatchList>, ProblemHttpResult> (BatchService batches, string? state, int? limit) =>
            {
                // A misspelt state would otherwise list nothing, as if no batch were in it.
                if (state is not null && !ListableStates.Contains(state))
                    return ApiProblems.Create(ErrorCodes.ValidationFailed, $"'state' must be one of {string.Join(", ", ListableStates)}; got '{state}'.");
                return TypedResults.Ok(new BatchList(batches.Store.List(Math.Clamp(limit ?? 100, 1, 1000), state).Select(BatchView.From).ToList()));
            })
            .WithName("ListBatches")
            .WithSummary("Lists batches, newest first (optional ?state=queued|running|done|cancelled|failed&limit=N).");

        group.MapGet("/{id}", Results<Ok<BatchView>, ProblemHttpResult> (string id, BatchService batches) =>
                Find(batches, id) is { } b ? TypedResults.Ok(BatchView.From(b)) : NotFound(id))
            .WithName("GetBatch")
            .WithSummary("State, frame counts and progress of a batch.")
            .ProducesProblem(404);

        group.MapGet("/{id}/frames", Results<Ok<BatchFrameList>, ProblemHttpResult> (string id, BatchService batches) =>
                Find(batches, id) is null ? NotFound(id) : TypedResults.Ok(new BatchFrameList(batches.Store.Frames(id).Select(FrameView.From).ToList())))
            .WithName("GetBatchFrames")
            .WithSummary("Every frame of a batch: state, score, when it was scored and how many times scoring started.")
            .ProducesProblem(404);

        group.MapGet("/{id}/manifest", IResult (string id, string? verdict, BatchService batches) =>
            {
                if (Find(batches, id) is not { } b) return NotFound(id);
                if (verdict is null)
                {
                    // Written on demand too, so an unfinished batch's manifest shows the frames done so far and the latest decisions.
                    return TypedResults.PhysicalFile(batches.WriteManifest(b), Manifest.ContentType);
                }
                if (!Review.Verdicts.IsKnown(verdict))
                    return ApiProblems.Create(ErrorCodes.ValidationFailed, $"'verdict' must be one of {string.Join(", ", Review.Verdicts.All)}; got '{verdict}'.");
                var lines = Manifest.Lines(batches.BatchFolder(id), b, batches.Store.Frames(id), batches.Decisions.Effective(id), verdict);
                using var buffer = new MemoryStream();
                Manifest.WriteTo(buffer, lines);
                return TypedResults.Bytes(buffer.ToArray(), Manifest.ContentType);
            })
            .WithName("GetBatchManifest")
            .WithSummary("JSON lines, one per frame, highest frame score first (regions with outlines and review decisions, artifact paths " +
                         "relative to the batch folder); a recording's line (kind 'recording': its kept tracks and timeline) is followed by " +
                         "one line per sampled frame (kind 'recording-frame': index, timeSeconds, each region's track); rewrites manifest.jsonl in the batch folder. ?verdict=label-it gives only the " +
                         "frames with that verdict on the frame or a region, without touching the file.")
            .Produces(200, contentType: Manifest.ContentType)
            .ProducesProblem(400).ProducesProblem(404);

        group.MapPost("/{id}/cancel", Results<Ok<BatchView>, ProblemHttpResult> (string id, BatchService batches) =>
            {
                if (Find(batches, id) is null) return NotFound(id);
                return TypedResults.Ok(BatchView.From(batches.Cancel(id)!));
            })
            .WithName("CancelBatch")
            .WithSummary("Cancels a queued or running batch; the frame being scored finishes, the rest stay pending.")
            .ProducesProblem(404).ProducesProblem(409);
    }

    private static async Task<IResult> SubmitAsync(HttpRequest request, BatchService batches, CancellationToken ct)
    {
        (BatchRecord batch, bool created, int added) result;
        if (request.HasJsonContentType())
        {
            BatchRequest? body;
            try { body = await request.ReadFromJsonAsync<BatchRequest>(RequestJson, ct); }
            catch (JsonException e) { return ApiProblems.Create(ErrorCodes.BadRequest, $"The body is not valid JSON: {e.Message}"); }
            if (body is null || string.IsNullOrWhiteSpace(body.Folder))
                return ApiProblems.Create(ErrorCodes.ValidationFailed, "Give 'model' and 'folder' (relative to the data folder), or upload an archive as multipart.");
            result = batches.SubmitFolder(body.Model ?? "", body.Folder, Blank(body.BatchId), Blank(body.CallbackUrl), Blank(body.Artifacts));
        }
        else if (request.HasFormContentType)
        {
            var (form, problem) = await UploadForm.ReadAsync(request, ArchivePart, ".zip or .tar archive of frames", ArchiveFields, ct);
            if (form is null) return problem!;
            var file = form.Files.GetFile(ArchivePart)!;
            string upload = Path.Combine(batches.Root, ".uploads", Guid.NewGuid().ToString("N") + ".upload");
            Directory.CreateDirectory(Path.GetDirectoryName(upload)!);
            try
            {
                await using (var target = File.Create(upload)) await file.CopyToAsync(target, ct);
                result = batches.SubmitArchive(form["model"].ToString(), upload, file.FileName, Blank(form["batchId"].ToString()),
                    Blank(form["callbackUrl"].ToString()), Blank(form["artifacts"].ToString()));
            }
            finally
            {
                File.Delete(upload);
            }
        }
        else
        {
            return ApiProblems.Create(ErrorCodes.UnsupportedMediaType,
                $"Content type '{request.ContentType}' is not accepted: send application/json (a folder) or multipart/form-data (an archive).");
        }
        var view = BatchView.From(result.batch);
        var answer = new BatchSubmitted(view, result.created, result.added);
        return result.created ? TypedResults.Created($"/v1/batches/{view.Id}", answer) : TypedResults.Ok(answer);
    }

    private static BatchRecord? Find(BatchService batches, string id) => BatchService.IsBatchId(id) ? batches.Store.Get(id) : null;

    private static ProblemHttpResult NotFound(string id) =>
        ApiProblems.Create(ErrorCodes.BatchNotFound, $"There is no batch '{id}'; GET /v1/batches lists them.");

    private static string? Blank(string? s) => string.IsNullOrWhiteSpace(s) ? null : s;
}

/// <summary>Refuses batch settings the worker cannot run with, naming each setting and its value.</summary>
public sealed class BatchOptionsValidator : Microsoft.Extensions.Options.IValidateOptions<BatchOptions>
{
    public Microsoft.Extensions.Options.ValidateOptionsResult Validate(string? name, BatchOptions options) =>
        options.Validate().ToList() is { Count: > 0 } problems
            ? Microsoft.Extensions.Options.ValidateOptionsResult.Fail(problems)
            : Microsoft.Extensions.Options.ValidateOptionsResult.Success;
}
