namespace Strayspot.Scoring.Logits;

/// <summary>
/// Input the scoring library refuses. <see cref="Code"/> is stable: the service maps it to a
/// problem+json error code and the command line prints it, so never rename an existing one.
/// </summary>
public sealed class ScoringInputException(string code, string message) : CodedException(code, message);

/// <summary>The stable codes of <see cref="ScoringInputException"/>.</summary>
public static class ScoringErrorCodes
{
    public const string LogitsShape = "logits-shape";
    public const string LogitsNonFinite = "logits-non-finite";
    public const string FrameSize = "frame-size";
    /// <summary>Logits whose aspect ratio disagrees with the frame's (height and width swapped?).</summary>
    public const string LogitsAspect = "logits-aspect";
    public const string NpyFormat = "npy-format";
    public const string StatisticsMismatch = "statistics-mismatch";
    public const string StatisticsFormat = "statistics-format";
    public const string Options = "options-invalid";
    public const string ClassIndexRange = "class-index-range";
}
