using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Reduction;

namespace Strayspot.Service.Calibration;

/// <summary>The scoring core's fused resize + reduction, so calibration measures exactly what SML will standardize.</summary>
public sealed class PixelReductionMaxLogitReducer : IMaxLogitReducer
{
    private readonly PixelReduction _reduction = new();
    private readonly ReducedMaps _maps = new();

    public void Reduce(LogitsView logits, int frameHeight, int frameWidth)
    {
        LogitsValidation.EnsureFinite(logits);
        _maps.EnsureSize(frameWidth, frameHeight, ReductionOutputs.None);
        _reduction.Reduce(logits, frameHeight, frameWidth, _maps);
    }

    public ReadOnlySpan<float> MaxLogit => _maps.MaxLogit;
    public ReadOnlySpan<ushort> ClassIndex => _maps.ClassIndex;
}
