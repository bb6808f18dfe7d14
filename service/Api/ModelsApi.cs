using Microsoft.AspNetCore.Http.HttpResults;
using Strayspot.Service.Hosting;
using Strayspot.Service.Models;
using Strayspot.Service.Profiles;

namespace Strayspot.Service.Api;

/// <summary>One installed model in a listing.</summary>
public sealed record ModelSummary(
    string Name,
    string? Description,
    bool Usable,
    string? Error,
    int ClassCount,
    bool HasStatistics,
    string ProfileVersion,
    string Method)
{
    /// <summary>"calibrated" (calibration.json bound to the weights and preprocessing), "statistics-only" (a bare
    /// statistics.json) or "uncalibrated" (the sml method is refused until the model is calibrated).</summary>
    public string Calibration { get; init; } = "uncalibrated";
}

/// <summary>Everything known about one installed model.</summary>
public sealed record ModelDetails(
    string Name,
    bool Usable,
    string? Error,
    ModelDescriptor? Descriptor,
    CalibrationSummary? Calibration,
    ScoringProfile Profile);

public sealed record ModelList(IReadOnlyList<ModelSummary> Models);

/// <summary>The installed models: their descriptors, class statistics and scoring profiles.</summary>
public static class ModelsApi
{
    public static void MapModelsApi(this RouteGroupBuilder v1)
    {
        var models = v1.MapGroup("/models").WithTags("Models");

        models.MapGet("", (ModelCatalog catalog, ModelSessions sessions) =>
                TypedResults.Ok(new ModelList(catalog.Models.Select(e => Summarize(e, sessions)).ToList())))
            .WithName("ListModels")
            .WithSummary("Lists the installed models.")
            .WithDescription("Each subfolder of ModelsRoot holding a descriptor.json is a model named after the folder. " +
                             "Unusable folders are listed with the reason.");

        models.MapGet("/{model}", Results<Ok<ModelDetails>, ProblemHttpResult> (string model, ModelCatalog catalog, ModelSessions sessions) =>
                catalog.TryGet(model, out var e)
                    ? TypedResults.Ok(new ModelDetails(e.Name, IsUsable(e, sessions), Error(e, sessions), e.Descriptor, e.Calibration, e.Profile))
                    : ApiProblems.ModelNotFound(model))
            .WithName("GetModel")
            .WithSummary("Describes one model: descriptor, class statistics summary and scoring profile.")
            .ProducesProblem(StatusCodes.Status404NotFound);

        models.MapGet("/{model}/drift", Results<Ok<Strayspot.Scoring.Drift.DriftReport>, ProblemHttpResult> (string model, ModelCatalog catalog, DriftWatch drift) =>
            {
                if (!catalog.TryGet(model, out var entry)) return ApiProblems.ModelNotFound(model);
                return drift.Report(entry) is { } report
                    ? TypedResults.Ok(report)
                    : ApiProblems.Create(ErrorCodes.StatisticsMissing, $"Model '{model}' has no calibration to compare production with.");
            })
            .WithSummary("How far the max logit of scored frames has moved from the calibration, per class and overall (in calibrated standard deviations).");
        models.MapPut("/{model}/profile", PutProfile)
            .RequireAuthorization(ApiPolicies.Admin)
            .Accepts<ScoringProfile>("application/json")
            .WithName("PutScoringProfile")
            .WithSummary("Replaces the model's scoring profile (needs a key with the 'admin' scope).")
            .WithDescription("The body is a whole scoring profile, never merged: options with every setting (method, energy " +
                             "temperature, boundary suppression and smoothing with all their parameters, threshold, minimum region " +
                             "area; surface classes optional), as GET /v1/models/{model} shows them; optional version (1-64 of " +
                             "A-Z a-z 0-9 . _ - : +) and note. An empty or partial body, unknown members and top-level method/threshold " +
                             "shorthands that disagree with options are refused. Without a version the current UTC time becomes " +
                             "the version. Frames scored afterwards report the new version.")
            .ProducesProblem(StatusCodes.Status400BadRequest)
            .ProducesProblem(StatusCodes.Status403Forbidden)
            .ProducesProblem(StatusCodes.Status404NotFound);

        models.MapPost("/reload", (ModelCatalog catalog, ModelSessions sessions) =>
            {
                catalog.Reload();
                sessions.Sync();
                return TypedResults.Ok(new ModelList(catalog.Models.Select(e => Summarize(e, sessions)).ToList()));
            })
            .RequireAuthorization(ApiPolicies.Admin)
            .WithName("ReloadModels")
            .WithSummary("Scans ModelsRoot again (needs a key with the 'admin' scope).")
            .ProducesProblem(StatusCodes.Status403Forbidden);
    }

    /// <summary>Replaces a model's scoring profile; the new version is the given one or the current UTC time.</summary>
    private static async Task<Results<Ok<ScoringProfile>, ProblemHttpResult>> PutProfile(
        string model, HttpRequest request, ModelCatalog catalog, TimeProvider time, CancellationToken ct)
    {
        if (!catalog.TryGet(model, out var entry)) return ApiProblems.ModelNotFound(model);
        if (!request.HasJsonContentType())
            return ApiProblems.Create(ErrorCodes.UnsupportedMediaType,
                $"Send the profile as application/json; got '{request.ContentType ?? "no content type"}'.");
        using var buffer = new MemoryStream();
        await request.Body.CopyToAsync(buffer, ct);
        buffer.Position = 0;
        ScoringProfile profile;
        try
        {
            profile = ScoringProfile.ReadReplacement(buffer.ToArray(), "The request body");
        }
        catch (Strayspot.Scoring.Logits.ScoringInputException e)
        {
            return ApiProblems.Create(ErrorCodes.ValidationFailed, e.Message);
        }
        var now = time.GetUtcNow();
        if (profile.Version == ScoringProfile.DefaultVersion) profile = profile with { Version = ScoringProfile.VersionAt(now) };
        profile = profile with { CreatedUtc = now };
        if (entry.Descriptor is { } d && profile.Effective.SurfaceClasses?.FirstOrDefault(c => c >= d.Classes.Count) is int bad and > 0)
            return ApiProblems.Create(ErrorCodes.ValidationFailed,
                $"Surface class {bad} does not exist: model '{model}' has {d.Classes.Count} classes (0..{d.Classes.Count - 1}).");
        profile.Save(entry.Folder);
        catalog.Reload();
        return TypedResults.Ok(catalog.TryGet(model, out var updated) ? updated.Profile : profile.Normalized());
    }

    // A folder whose files read well can still fail when ONNX Runtime loads or warms the network: that is unusable too.
    private static string? LoadError(CatalogEntry e, ModelSessions sessions) =>
        e.IsUsable && e.Version is { } v ? sessions.Registry.LoadError(v) : null;

    private static bool IsUsable(CatalogEntry e, ModelSessions sessions) => e.IsUsable && LoadError(e, sessions) is null;

    private static string? Error(CatalogEntry e, ModelSessions sessions) => e.Error ?? LoadError(e, sessions);

    private static ModelSummary Summarize(CatalogEntry e, ModelSessions sessions) => new(
        e.Name,
        e.Descriptor?.Description,
        IsUsable(e, sessions),
        Error(e, sessions),
        e.Descriptor?.Classes.Count ?? 0,
        e.Statistics is not null,
        e.Profile.Version,
        e.Profile.Effective.Method.ToString().ToLowerInvariant())
    {
        Calibration = e.Calibration?.File switch
        {
            ModelCatalog.CalibrationFile => "calibrated",
            ModelCatalog.StatisticsFile => "statistics-only",
            _ => "uncalibrated",
        },
    };
}
