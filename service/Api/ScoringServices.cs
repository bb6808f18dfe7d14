using Microsoft.Extensions.Options;
using Strayspot.Service.Hosting;
using Strayspot.Service.Inference;

namespace Strayspot.Service.Api;

/// <summary>What the image and logits scoring handlers take from the container, bound as one <c>[AsParameters]</c> set.</summary>
public readonly record struct ScoringServices(
    ModelCatalog Catalog,
    ModelSessions Sessions,
    ScoringLane Lane,
    FrameRunner Runner,
    ArtifactStore Store,
    ServiceMetrics Metrics,
    IOptions<ServiceOptions> Options,
    TimeProvider Time,
    ILoggerFactory Logs);
