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
    string Method);

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
    public static void Map(RouteGroupBuilder v1)
    {
        var models = v1.MapGroup("/models").WithTags("Models");

        models.MapGet("", (ModelCatalog catalog) => TypedResults.Ok(new ModelList(catalog.Models.Select(Summarize).ToList())))
            .WithName("ListModels")
            .WithSummary("Lists the installed models.")
            .WithDescription("Each subfolder of ModelsRoot holding a descriptor.json is a model named after the folder. " +
                             "Unusable folders are listed with the reason.");

        models.MapGet("/{model}", Results<Ok<ModelDetails>, ProblemHttpResult> (string model, ModelCatalog catalog) =>
                catalog.TryGet(model, out var e)
                    ? TypedResults.Ok(new ModelDetails(e.Name, e.IsUsable, e.Error, e.Descriptor, e.Calibration, e.Profile))
                    : ApiProblems.ModelNotFound(model))
            .WithName("GetModel")
            .WithSummary("Describes one model: descriptor, class statistics summary and scoring profile.")
            .ProducesProblem(StatusCodes.Status404NotFound);

        models.MapPost("/reload", (ModelCatalog catalog) =>
            {
                catalog.Reload();
                return TypedResults.Ok(new ModelList(catalog.Models.Select(Summarize).ToList()));
            })
            .RequireAuthorization(ApiPolicies.Admin)
            .WithName("ReloadModels")
            .WithSummary("Scans ModelsRoot again (needs a key with the 'admin' scope).")
            .ProducesProblem(StatusCodes.Status403Forbidden);
    }

    private static ModelSummary Summarize(CatalogEntry e) => new(
        e.Name,
        e.Descriptor?.Description,
        e.IsUsable,
        e.Error,
        e.Descriptor?.Classes.Count ?? 0,
        e.Statistics is not null,
        e.Profile.Version,
        e.Profile.Effective.Method.ToString().ToLowerInvariant());
}
