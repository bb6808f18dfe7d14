using Strayspot.Service.Inference;
using Strayspot.Service.Rendering;
using Microsoft.AspNetCore.Http.HttpResults;
using Microsoft.Extensions.Options;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Frames;
using Strayspot.Service.Hosting;
using Strayspot.Service.Models;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Api;

/// <summary>For the API description only: the multipart fields of an image upload.</summary>
public sealed class FrameUpload : ScoringFields
{
    /// <summary>The camera frame: PNG, JPEG or WebP.</summary>
    public IFormFile? Frame { get; set; }
}

/// <summary>Runs the model on a camera frame and scores its logits.</summary>
public static class ImageFramesApi
{
    public const string FramePart = "frame";

    public static void MapImageFramesApi(this RouteGroupBuilder v1)
    {
        v1.MapGroup("/models/{model}/frames").WithTags("Frames")
            .MapPost("", Score)
            .WithName("ScoreFrame")
            .WithSummary("Runs the model on one camera frame and scores it.")
            .WithDescription(
                "Multipart form: file part `frame` (PNG, JPEG or WebP) and the optional fields of the logits endpoint " +
                "(without frameWidth/frameHeight: the image has its size). The overlay artifact is available here. " +
                "Scores are triage evidence, not a safety decision.")
            .DisableAntiforgery()
            .Accepts<FrameUpload>("multipart/form-data")
            .Produces<ScoredFrame>()
            .ProducesProblem(StatusCodes.Status400BadRequest)
            .ProducesProblem(StatusCodes.Status404NotFound)
            .ProducesProblem(StatusCodes.Status413PayloadTooLarge)
            .ProducesProblem(StatusCodes.Status415UnsupportedMediaType)
            .ProducesProblem(StatusCodes.Status422UnprocessableEntity)
            .ProducesProblem(StatusCodes.Status429TooManyRequests)
            .ProducesProblem(StatusCodes.Status503ServiceUnavailable);
    }

    private static async Task<Results<Ok<ScoredFrame>, InlineArtifactsResult, ProblemHttpResult>> Score(
        string model, HttpRequest request, [AsParameters] ScoringServices services, FrameDecoder decoder, CancellationToken ct)
    {
        var (catalog, sessions, lane, runner, store, metrics, options, time, logs) = services;
        var received = time.GetUtcNow();
        if (!catalog.TryGet(model, out var entry)) return ApiProblems.ModelNotFound(model);
        if (!entry.IsUsable)
            return ApiProblems.Unusable(entry);
        if (!ModelSessions.HasOnnx(entry))
            return ApiProblems.Create(ErrorCodes.ModelUnavailable,
                $"Model '{model}' has no {SegmentationModel.ModelFileName}; send logits to /v1/models/{model}/logits instead.");
        using var lease = sessions.TryBorrow(entry);
        if (lease is null)
            return ApiProblems.Create(ErrorCodes.NotReady, $"Model '{model}' is still loading; retry shortly (GET /readyz tells when).");
        long uploadStart = System.Diagnostics.Stopwatch.GetTimestamp();
        var (form, problem) = await UploadForm.ReadAsync(request, FramePart, "camera image (PNG, JPEG or WebP)", ScoringForm.FieldsFor(FramePart), ct);
        if (form is null) return problem!;
        var (req, errors) = ScoringForm.Parse(form, entry.Profile.Effective, options.Value.MaxPixels, null, FramePart, "camera image");
        var file = form.Files.GetFile(FramePart);
        if (file is null && !errors.ContainsKey(FramePart))
            errors[FramePart] = [$"The form has no file part '{FramePart}' (PNG, JPEG or WebP)."];
        if (req is null || file is null) return ApiProblems.Validation(errors);
        // The same readiness rule as score and batches; its ModelException becomes problem+json (422).
        ModelReadiness.EnsureCanScore(entry.Descriptor!, entry.Statistics, req.Options, entry.Folder);

        // One pooled copy of the upload (the form keeps its own): returned once the frame is decoded or refused.
        int length = (int)Math.Min(file.Length, int.MaxValue);
        byte[] bytes = System.Buffers.ArrayPool<byte>.Shared.Rent(Math.Max(1, length));
        string frameId;
        string? folder;
        FrameReport report;
        try
        {
            await using (var upload = file.OpenReadStream())
                await upload.ReadExactlyAsync(bytes.AsMemory(0, length), ct);
            (frameId, folder) = req.Artifacts.Count > 0 ? store.CreateFrameFolder() : (ArtifactStore.NewFrameId(), null);
            var writer = new FrameFolderWriter(lease.Version);
            long queued = System.Diagnostics.Stopwatch.GetTimestamp();
            metrics.Stage("upload", System.Diagnostics.Stopwatch.GetElapsedTime(uploadStart, queued));
            report = await lane.RunAsync(token =>
            {
                long t0 = System.Diagnostics.Stopwatch.GetTimestamp();
                metrics.Stage("wait", System.Diagnostics.Stopwatch.GetElapsedTime(queued, t0));
                using var frame = decoder.Decode(new MemoryStream(bytes, 0, length, writable: false, publiclyVisible: true), FramePart);
                metrics.Stage("decode", System.Diagnostics.Stopwatch.GetElapsedTime(t0));
                return runner.Score(lease, frame, req.Options, (scored, timings) =>
                {
                    long t1 = System.Diagnostics.Stopwatch.GetTimestamp();
                    var r = writer.Write(scored, timings, req.Options, frameId, folder, req.Artifacts, frame.Image,
                        new LogitsReport(scored.ClassCount, scored.LogitsHeight, scored.LogitsWidth));
                    metrics.Stage("encode", System.Diagnostics.Stopwatch.GetElapsedTime(t1));
                    return r;
                }, token);
            }, ct);
        }
        catch (QueueFullException)
        {
            metrics.Refused();
            throw;
        }
        finally
        {
            System.Buffers.ArrayPool<byte>.Shared.Return(bytes);
        }

        report = report with { Artifacts = req.Artifacts.ToDictionary(a => a, a => $"/v1/frames/{frameId}/{a}") };
        LogitsApi.LogFrame(logs, report, entry.Name);
        var answer = new ScoredFrame(frameId, req.Metadata, received, report);
        if (req.Inline) return new InlineArtifactsResult(answer, folder);
        return TypedResults.Ok(answer);
    }
}
