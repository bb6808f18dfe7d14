using System.Numerics.Tensors;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Evaluation;

/// <summary>Checks a batch before any of it is counted, so a refused batch leaves an accumulator unchanged.</summary>
internal static class PixelInput
{
    public static void Validate(ReadOnlySpan<float> score, ReadOnlySpan<byte> label)
    {
        if (score.Length != label.Length)
            throw new ScoringInputException(EvaluationErrorCodes.LengthMismatch,
                $"Scores and labels must have the same length; got {score.Length} scores and {label.Length} labels.");
        int bad = label.IndexOfAnyExcept((byte)0, (byte)1, (byte)255);
        if (bad >= 0)
            throw new ScoringInputException(EvaluationErrorCodes.LabelValue,
                $"Anomaly labels must be 0 (in-distribution), 1 (anomaly) or 255 (ignore); got {label[bad]} at position {bad}.");
        // Vectorized test first; NaN under an ignore label is allowed, so only then look pixel by pixel.
        if (!TensorPrimitives.IsNaNAny(score)) return;
        for (int i = 0; i < score.Length; i++)
            if (float.IsNaN(score[i]) && label[i] != 255)
                throw new ScoringInputException(EvaluationErrorCodes.ScoreNaN, $"Scores must not be NaN; got NaN at position {i}.");
    }
}
