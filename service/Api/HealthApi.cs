using Microsoft.AspNetCore.Http.HttpResults;
using Strayspot.Service.Hosting;

namespace Strayspot.Service.Api;

public sealed record LiveStatus(string Status);
public sealed record ReadyStatus(string Status, IReadOnlyList<string> Models);

/// <summary>Liveness and readiness for orchestrators: no key needed, no queue, answered at once.</summary>
public static class HealthApi
{
    public static void MapHealthApi(this IEndpointRouteBuilder app)
    {
        var health = app.MapGroup("").WithTags("Health").AllowAnonymous();

        health.MapGet("/healthz", () => TypedResults.Ok(new LiveStatus("alive")))
            .WithName("Live")
            .WithSummary("The process is up and answering.")
            .WithDescription("Always 200 while the process runs; restart the service when this fails.");

        health.MapGet("/readyz", Results<Ok<ReadyStatus>, ProblemHttpResult> (Readiness readiness) =>
            {
                var r = readiness.Check();
                if (r.Ready) return TypedResults.Ok(new ReadyStatus("ready", r.Models));
                return ApiProblems.Create(ErrorCodes.NotReady, string.Join(" ", r.Problems),
                    new Dictionary<string, object?> { ["problems"] = r.Problems });
            })
            .WithName("Ready")
            .WithSummary("The models are loaded and frames can be scored.")
            .WithDescription("200 when every installed model is usable; 503 problem `not-ready` listing what is missing.")
            .ProducesProblem(StatusCodes.Status503ServiceUnavailable);
    }
}
