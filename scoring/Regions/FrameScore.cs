using System.Numerics.Tensors;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Regions;

/// <summary>One number per frame for ranking frames.</summary>
public static class FrameScore
{
    /// <summary>
    /// The largest anomaly score of the frame. It needs no threshold, so frames can be ranked before anyone has
    /// chosen one, and it ranks a frame by its most unknown spot however small the rest of the frame makes it.
    /// A maximum would be at the mercy of single-pixel speckle, but the smoothing stage averages every pixel
    /// with its surroundings first, so only a spot with some extent can raise it. Input is assumed NaN-free.
    /// </summary>
    public static float Compute(ReadOnlySpan<float> score)
    {
        if (score.IsEmpty)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize, "A frame score needs at least one pixel; got 0.");
        return TensorPrimitives.Max(score);
    }
}
