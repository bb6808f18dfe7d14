using Microsoft.AspNetCore.Http.HttpResults;
using Strayspot.Service.Hosting;

namespace Strayspot.Service.Api;

/// <summary>Per-frame artifacts (PNG maps, score arrays), kept for the retention period.</summary>
public static class ArtifactsApi
{
    public static void MapArtifactsApi(this RouteGroupBuilder v1)
    {
        var frames = v1.MapGroup("/frames").WithTags("Frames");
        frames.MapGet("/{frameId}/{artifact}", Results<PhysicalFileHttpResult, ProblemHttpResult> (string frameId, string artifact, ArtifactStore store) =>
            {
                if (!ArtifactStore.Files.ContainsKey(artifact))
                    return ApiProblems.Create(ErrorCodes.ArtifactNotFound,
                        $"'{artifact}' is not an artifact name; use one of {string.Join(", ", ArtifactStore.Files.Keys)}.");
                string? path = store.Find(frameId, artifact);
                if (path is null)
                    return ApiProblems.Create(ErrorCodes.ArtifactNotFound,
                        $"Frame '{frameId}' has no '{artifact}' artifact: it was not requested, or it expired after {store.Retention}.");
                return TypedResults.PhysicalFile(path, ArtifactStore.ContentType(artifact), Path.GetFileName(path));
            })
            .WithName("GetFrameArtifact")
            .WithSummary("Downloads one artifact of a scored frame (classes, mask, heat, overlay: PNG; score: NPY float32).")
            .ProducesProblem(StatusCodes.Status404NotFound);
    }
}
