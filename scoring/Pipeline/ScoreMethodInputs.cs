namespace Strayspot.Scoring.Pipeline;

/// <summary>
/// What each scoring method needs from the model's output: a per-method property meant to sit in the method table.
/// A model that ends in softmax gives probabilities: the reduction then works from clamped log-probabilities, which
/// keeps MSP and entropy exact. Max logit (it would become log MSP), energy (constant 0) and SML (standardizes raw
/// logits) lose their meaning there and are refused.
/// </summary>
public static class ScoreMethodInputs
{
    /// <summary>True when the method is defined on a model's softmax probabilities as well as on its logits.</summary>
    public static bool WorksOnProbabilities(ScoreMethod method) => method is ScoreMethod.Msp or ScoreMethod.Entropy;

    /// <summary>The highest and lowest anomaly score the method can give on <paramref name="classes"/> classes (null: unbounded).</summary>
    public static (double? Low, double? High) ScoreBounds(ScoreMethod method, int classes) => method switch
    {
        ScoreMethod.Msp => (-1.0, -1.0 / Math.Max(1, classes)),
        ScoreMethod.Entropy => (0.0, Math.Log(Math.Max(1, classes))),
        _ => (null, null),
    };
}
