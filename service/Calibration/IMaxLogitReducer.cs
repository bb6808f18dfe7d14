using Strayspot.Scoring.Logits;

namespace Strayspot.Service.Calibration;

/// <summary>
/// Resizes one frame's logits to the frame's size and keeps, per pixel, the predicted class and its max logit.
/// The maps stay valid until the next <see cref="Reduce"/>. One instance per worker.
/// </summary>
public interface IMaxLogitReducer
{
    void Reduce(LogitsView logits, int frameHeight, int frameWidth);
    ReadOnlySpan<float> MaxLogit { get; }
    ReadOnlySpan<ushort> ClassIndex { get; }
}
