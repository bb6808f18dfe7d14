using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Service.Models;

/// <summary>
/// Whether a model can score with given options, checked before any frame runs. The rule without statistics: SML is
/// refused with the fix named, never replaced by max logit under SML's threshold (whose scale does not fit).
/// </summary>
public static class ModelReadiness
{
    public static void EnsureCanScore(SegmentationModel model, ClassStatistics? statistics, ScoringOptions options, string modelFolder) =>
        EnsureCanScore(model.Descriptor, statistics, options, modelFolder);

    /// <summary>The same check without a session: a batch is refused with it before anything is stored.</summary>
    public static void EnsureCanScore(ModelDescriptor descriptor, ClassStatistics? statistics, ScoringOptions options, string modelFolder)
    {
        EnsureMethodFits(descriptor, Path.GetFileName(Path.TrimEndingDirectorySeparator(modelFolder)), options.Method);
        if (options.Method == ScoreMethod.Sml && statistics is null)
            throw new ModelException(ModelErrorCodes.StatisticsMissing,
                $"Model '{Path.GetFileName(Path.TrimEndingDirectorySeparator(modelFolder))}' is not calibrated (no calibration.json), and the sml method needs its class statistics. " +
                $"Calibrate it on ordinary frames: strayspot calibrate {modelFolder} <frames-folder> " +
                $"(over HTTP: POST /v1/models/{Path.GetFileName(Path.TrimEndingDirectorySeparator(modelFolder))}/calibrations). " +
                "Or choose a method without statistics together with a threshold on that method's scale " +
                "(e.g. --method msp --threshold -0.5 flags pixels whose top class has less than 50% probability).");
    }

    public static void EnsureMethodFits(ModelDescriptor descriptor, string modelName, ScoreMethod method)
    {
        if (descriptor.Output.Kind == "probabilities" && !ScoreMethodInputs.WorksOnProbabilities(method))
            throw new ModelException(ModelErrorCodes.MethodNeedsLogits,
                $"Model '{modelName}' outputs probabilities (output.kind), so the {MethodName(method)} method cannot be used: it needs the raw logits " +
                "that the final softmax discards. Use --method msp or --method entropy, or export the model without its final Softmax and set output.kind to 'logits'.");
    }

    private static string MethodName(ScoreMethod m) => System.Text.Json.JsonSerializer.Serialize(m).Trim('"');
}
