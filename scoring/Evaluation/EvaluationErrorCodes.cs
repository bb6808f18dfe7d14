namespace Strayspot.Scoring.Evaluation;

/// <summary>
/// Stable codes of <see cref="Logits.ScoringInputException"/> raised by the evaluation metrics.
/// Kept here rather than in <see cref="Logits.ScoringErrorCodes"/> so parallel work on that file does not collide;
/// the strings are what callers match on, so never rename one.
/// </summary>
public static class EvaluationErrorCodes
{
    /// <summary>A label outside the allowed values (anomaly labels: 0, 1, 255; masks: 0, 1).</summary>
    public const string LabelValue = "evaluation-label-value";
    /// <summary>A score that is NaN.</summary>
    public const string ScoreNaN = "evaluation-score-nan";
    /// <summary>Scores and labels (or maps) of different lengths.</summary>
    public const string LengthMismatch = "evaluation-length-mismatch";
    /// <summary>A metric needs both classes (anomaly and in-distribution) and one is missing.</summary>
    public const string OneClass = "evaluation-one-class";
    /// <summary>A bad argument: a target rate outside (0,1], a score range, a bin count, a class count.</summary>
    public const string Argument = "evaluation-argument";
    /// <summary>Two accumulators that cannot be merged (different ranges, bins or classes).</summary>
    public const string MergeMismatch = "evaluation-merge-mismatch";
}
