using Strayspot.Service.Rendering;
using System.Diagnostics;
using Microsoft.AspNetCore.Http.HttpResults;
using Microsoft.Extensions.Options;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Hosting;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Api;

/// <summary>A scored frame: the service's frame id, what the client said about the frame, and the frame report.</summary>
public sealed record ScoredFrame(string FrameId, FrameMetadata Client, DateTimeOffset ReceivedUtc, FrameReport Report);

/// <summary>For the API description only: the optional multipart fields both scoring endpoints take.</summary>
public class ScoringFields
{
    /// <summary>msp, maxlogit, entropy, energy or sml; default the model's scoring profile.</summary>
    public string? Method { get; set; }
    public float? Threshold { get; set; }
    public int? MinArea { get; set; }
    /// <summary>on or off.</summary>
    public string? BoundarySuppression { get; set; }
    /// <summary>on or off.</summary>
    public string? Smoothing { get; set; }
    public string? ClientFrameId { get; set; }
    /// <summary>ISO 8601.</summary>
    public DateTimeOffset? CaptureTime { get; set; }
    public string? RigId { get; set; }
    /// <summary>Comma list of classes, mask, heat, overlay (frames only), score (NPY), score16, or all or none; default classes,mask,heat.</summary>
    public string? Artifacts { get; set; }
}

/// <summary>For the API description only: the multipart fields of a logits upload.</summary>
public sealed class LogitsUpload : ScoringFields
{
    /// <summary>float32 NPY, shape [C,h,w] or [1,C,h,w] (C = the model's classes).</summary>
    public IFormFile? Logits { get; set; }
    /// <summary>Frame width the logits are resized to; default the logits' width. Give with frameHeight.</summary>
    public int? FrameWidth { get; set; }
    public int? FrameHeight { get; set; }
    /// <summary>on: accept logits whose aspect ratio differs from the frame's (they are stretched onto it); default off, refused with logits-aspect.</summary>
    public string? Stretch { get; set; }
}

/// <summary>Scores logits a client computed with its own copy of the model.</summary>
public static class LogitsApi
{
    /// <summary>Without the camera image there is nothing to overlay.</summary>
    private static readonly IReadOnlySet<string> Available = ArtifactStore.Files.Keys.Where(k => k != "overlay").ToHashSet();

    /// <summary>An answer as the API docs show it: one debris region on the apron.</summary>
    public const string Example = """
        {
          "frameId": "3f2b9c0e41d84b8c9a51d0c3e7a26f11",
          "client": { "clientFrameId": "cam3-000117", "captureTime": "2026-12-01T08:30:00+00:00", "rigId": "apron-rig-7" },
          "receivedUtc": "2026-12-01T08:30:00.412+00:00",
          "report": {
            "frameId": "3f2b9c0e41d84b8c9a51d0c3e7a26f11",
            "frame": { "width": 1024, "height": 512 },
            "logits": { "classes": 6, "height": 128, "width": 256 },
            "model": { "name": "apron-seg", "sha256": "9e1c…", "profileVersion": "20261130T101500Z" },
            "scoreConvention": "higher-is-more-anomalous",
            "method": "sml",
            "threshold": 2.0,
            "frameScore": 4.81,
            "flaggedPixels": 1184,
            "anomalousShare": 0.00226,
            "regions": [
              { "id": 1, "box": { "x": 611, "y": 388, "width": 41, "height": 33 }, "area": 1184, "areaShare": 0.00226,
                "centroid": [631.4, 404.9], "maxScore": 6.02, "meanScore": 3.37,
                "classBeneath": 0, "classBeneathName": "apron-surface", "classBeneathShare": 0.91, "onSurface": true }
            ],
            "timingsMs": { "reduction": 6.1, "standardization": 0.4, "boundarySuppression": 3.2, "smoothing": 4.9, "regions": 1.1, "scoringTotal": 15.7 },
            "artifacts": { "classes": "/v1/frames/3f2b9c0e41d84b8c9a51d0c3e7a26f11/classes", "mask": "/v1/frames/3f2b9c0e41d84b8c9a51d0c3e7a26f11/mask", "heat": "/v1/frames/3f2b9c0e41d84b8c9a51d0c3e7a26f11/heat" },
            "notice": "Data-triage and monitoring aid, not a certified safety function; validate it on your own data and follow your local rules."
          }
        }
        """;

    public static void MapLogitsApi(this RouteGroupBuilder v1)
    {
        SchemaExamples.Register<ScoredFrame>(() => System.Text.Json.Nodes.JsonNode.Parse(Example)!);
        v1.MapGroup("/models/{model}/logits").WithTags("Frames")
            .MapPost("", Score)
            .WithName("ScoreLogits")
            .WithSummary("Scores one frame's logits with the model's class statistics and scoring profile.")
            .WithDescription(
                "Multipart form: file part `logits` (float32 NPY, [C,h,w] or [1,C,h,w]) and optional fields. " +
                "Fields override the model's scoring profile for this frame only. Logits whose aspect ratio disagrees with " +
                "frameWidth × frameHeight beyond rounding and padding (height and width swapped?) are refused with 400 logits-aspect " +
                "unless stretch=on. The answer is the frame report " +
                "with links to the requested artifacts under /v1/frames/{frameId}/. Frames beyond the service's " +
                "queue get 429 with Retry-After. Scores are triage evidence, not a safety decision.")
            .DisableAntiforgery()
            .Accepts<LogitsUpload>("multipart/form-data")
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
        string model, HttpRequest request, [AsParameters] ScoringServices services, CancellationToken ct)
    {
        var (catalog, sessions, lane, runner, store, _, options, time, logs) = services;
        var received = time.GetUtcNow();
        if (!catalog.TryGet(model, out var entry)) return ApiProblems.ModelNotFound(model);
        if (!entry.IsUsable)
            return ApiProblems.Unusable(entry);
        var (form, problem) = await UploadForm.ReadAsync(request, ScoringForm.LogitsPart, "float32 NPY logits", ScoringForm.FieldsFor(ScoringForm.LogitsPart), ct);
        if (form is null) return problem!;

        var (parsed, errors) = ScoringForm.Parse(form, entry.Profile.Effective, options.Value.MaxPixels, Available);
        var file = form.Files.GetFile(ScoringForm.LogitsPart);
        if (file is null && !errors.ContainsKey(ScoringForm.LogitsPart))
            errors[ScoringForm.LogitsPart] = [$"The form has no file part '{ScoringForm.LogitsPart}' (float32 NPY, [C,h,w] or [1,C,h,w])."];
        if (parsed is null || file is null) return ApiProblems.Validation(errors);
        var req = parsed;

        if (file.Length == 0)
            throw new ScoringInputException(ScoringErrorCodes.NpyFormat, $"File part '{ScoringForm.LogitsPart}' is empty.");
        NpyArray<float> npy;
        await using (var stream = file.OpenReadStream())
        {
            // The NPY reader is synchronous; the part is already buffered by the form reader (memory or temp file).
            npy = Npy.ReadFloat32(stream);
        }
        var shape = Array.ConvertAll(npy.Shape, d => (long)d);
        var logits = LogitsView.FromShape(npy.Data, shape);

        var descriptor = entry.Descriptor!;
        if (logits.Channels != descriptor.Classes.Count)
            return ApiProblems.Create(ErrorCodes.ModelClassMismatch,
                $"The logits have {logits.Channels} classes but model '{model}' has {descriptor.Classes.Count}.",
                new Dictionary<string, object?> { ["logitsClasses"] = logits.Channels, ["modelClasses"] = descriptor.Classes.Count });
        // The same readiness rule as score and batches; its ModelException becomes problem+json (422).
        ModelReadiness.EnsureCanScore(descriptor, entry.Statistics, req.Options, entry.Folder);
        entry.Statistics?.EnsureClassCount(logits.Channels);

        int frameWidth = req.FrameWidth ?? logits.Width, frameHeight = req.FrameHeight ?? logits.Height;
        if (!req.Stretch)
            LogitsAspect.EnsureAgrees(logits.Height, logits.Width, frameHeight, frameWidth, "frameWidth and frameHeight give the frame's size", "the field stretch=on");
        if ((long)frameWidth * frameHeight > options.Value.MaxPixels)
            return ApiProblems.Validation(new Dictionary<string, string[]>
            {
                ["logits"] = [$"The logits' {frameWidth}×{frameHeight} frame is larger than the service accepts ({options.Value.MaxPixels} pixels, Service:MaxPixels)."],
            });

        var (frameId, folder) = req.Artifacts.Count > 0 ? store.CreateFrameFolder() : (ArtifactStore.NewFrameId(), null);
        // Logits need no session: the lease only carries the version's pipelines.
        using var lease = sessions.BorrowPools(entry);
        var writer = new FrameFolderWriter(lease.Version);
        var report = await lane.RunAsync(token => runner.ScoreLogits(lease, logits, frameHeight, frameWidth, req.Options,
            (scored, timings) => writer.Write(scored, timings, req.Options, frameId, folder, req.Artifacts, null,
                new LogitsReport(logits.Channels, logits.Height, logits.Width)), token), ct);

        var links = req.Artifacts.ToDictionary(a => a, a => $"/v1/frames/{frameId}/{a}");
        report = report with { Artifacts = links };
        LogFrame(logs, report, entry.Name);
        var answer = new ScoredFrame(frameId, req.Metadata, received, report);
        if (req.Inline) return new InlineArtifactsResult(answer, folder);
        return TypedResults.Ok(answer);
    }

    internal static void LogFrame(ILoggerFactory logs, FrameReport r, string model)
    {
        var t = r.TimingsMs;
        logs.CreateLogger("Strayspot.Frames").LogInformation(
            "Scored frame {FrameId} with {Model} ({Method}): frame {FrameWidth}x{FrameHeight} from logits {Classes}x{LogitsHeight}x{LogitsWidth}, " +
            "{RegionCount} regions, {FlaggedPixels} flagged; ms reduction {ReductionMs:0.0} standardization {StandardizationMs:0.0} " +
            "boundary {BoundaryMs:0.0} smoothing {SmoothingMs:0.0} regions {RegionsMs:0.0} total {TotalMs:0.0}",
            r.FrameId, model, r.Method, r.Frame.Width, r.Frame.Height, r.Logits.Classes, r.Logits.Height, r.Logits.Width,
            r.Regions.Count, r.FlaggedPixels, t["reduction"], t["standardization"], t["boundarySuppression"], t["smoothing"],
            t["regions"], t["scoringTotal"]);
    }
}
