using System.Text.Json;
using Microsoft.Extensions.Options;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Service.Hosting;

/// <summary>Scoring pipelines kept per model and options, so frames reuse buffers already sized for them.</summary>
public sealed class PipelinePool(IOptions<ServiceOptions> options)
{
    private readonly KeyedPool<FramePipeline> _pool = new(perKey: Math.Max(1, options.Value.MaxConcurrentFrames), maxKeys: 32);

    /// <summary>Model, its statistics file and the exact options: any change makes a new pipeline.</summary>
    public static string Key(CatalogEntry model, ScoringOptions scoring) =>
        model.Name + "|" + model.LoadedUtc.Ticks + "|" + JsonSerializer.Serialize(scoring);

    public FramePipeline Rent(string key, Func<FramePipeline> create) => _pool.Rent(key, create);

    public void Return(string key, FramePipeline pipeline) => _pool.Return(key, pipeline);
}
