using System.Text.Json.Serialization;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Service.Rendering;

/// <summary>How heat colours are spread over anomaly scores.</summary>
[JsonConverter(typeof(JsonStringEnumConverter<HeatScaleMode>))]
public enum HeatScaleMode
{
    /// <summary>The same scale for every frame, anchored at the threshold, so colours compare across frames.</summary>
    [JsonStringEnumMemberName("fixed")] Fixed,
    /// <summary>Stretched to the frame's own lowest and highest score: shows detail, compares with nothing.</summary>
    [JsonStringEnumMemberName("frame")] Frame,
}

/// <summary>
/// The score range the heat colours span: <see cref="Low"/> → darkest, <see cref="High"/> → lightest, scores outside
/// clamped. The fixed scale runs from four units below the threshold to two above it, so the threshold always sits
/// two thirds along the colour bar and everything flagged wears the light third. A unit is one standard deviation for
/// SML, one logit for max logit and energy, 0.25 nats for entropy and 0.1 for MSP.
/// </summary>
public sealed record HeatScale(
    [property: JsonPropertyName("low")] float Low,
    [property: JsonPropertyName("high")] float High,
    [property: JsonPropertyName("threshold")] float Threshold,
    [property: JsonPropertyName("mode")] HeatScaleMode Mode)
{
    public const float UnitsBelow = 4f;
    public const float UnitsAbove = 2f;

    public static float UnitOf(ScoreMethod method) => method switch
    {
        ScoreMethod.Msp => 0.1f,
        ScoreMethod.Entropy => 0.25f,
        _ => 1f,
    };

    public static HeatScale Fixed(ScoreMethod method, float threshold)
    {
        float unit = UnitOf(method);
        return new HeatScale(threshold - UnitsBelow * unit, threshold + UnitsAbove * unit, threshold, HeatScaleMode.Fixed);
    }

    public static HeatScale OfFrame(ReadOnlySpan<float> score, float threshold)
    {
        float lo = score.IsEmpty ? 0 : System.Numerics.Tensors.TensorPrimitives.Min(score);
        float hi = score.IsEmpty ? 1 : System.Numerics.Tensors.TensorPrimitives.Max(score);
        return new HeatScale(lo, hi > lo ? hi : lo + 1, threshold, HeatScaleMode.Frame);
    }

    public static HeatScale For(FrameScoring s, HeatScaleMode mode) =>
        mode == HeatScaleMode.Frame ? OfFrame(s.AnomalyScore, s.Threshold) : Fixed(s.Method, s.Threshold);

    /// <summary>Heat table index (0..255) of a score.</summary>
    public int IndexOf(float score)
    {
        float scale = 255f / (High - Low);
        return Math.Clamp((int)((score - Low) * scale), 0, 255);
    }

    /// <summary>Where a score sits along the bar, 0..1.</summary>
    public double PositionOf(float score) => Math.Clamp((score - Low) / (double)(High - Low), 0, 1);
}
