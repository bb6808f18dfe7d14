namespace Strayspot.Service.Models;

/// <summary>
/// A model, descriptor or calibration the service refuses (frames have <see cref="Frames.FrameException"/>). <see cref="Code"/> is stable
/// (see <see cref="ModelErrorCodes"/>): HTTP problem details and the command line print it.
/// </summary>
public sealed class ModelException(string code, string message, Exception? inner = null) : Scoring.CodedException(code, message, inner);

/// <summary>The stable codes of <see cref="ModelException"/>; never rename one.</summary>
public static class ModelErrorCodes
{
    public const string DescriptorInvalid = "descriptor-invalid";
    public const string ModelInvalid = "model-invalid";
    public const string ModelOutputMismatch = "model-output-mismatch";
    public const string ModelExternalData = "model-external-data";
    public const string CalibrationModelMismatch = "calibration-model-mismatch";
    public const string CalibrationInvalid = "calibration-invalid";
    /// <summary>Same string as the API's code: SML asked for, but the model has no class statistics.</summary>
    public const string StatisticsMissing = "statistics-missing";
    /// <summary>A method that needs raw logits asked of a model whose output is probabilities.</summary>
    public const string MethodNeedsLogits = "method-needs-logits";
}
