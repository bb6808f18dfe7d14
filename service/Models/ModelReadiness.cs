using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Service.Models;

/// <summary>
/// Whether a model can score with given options, checked before any frame runs. The rule without statistics: SML is
/// refused with the fix named, never replaced by max logit under SML's threshold (whose scale does not fit).
/// </summary>
public static class ModelReadiness
{
    public static void EnsureCanScore(SegmentationModel model, ClassStatistics? statistics, ScoringOptions options, string modelFolder)
    {
        model.EnsureMethodFits(options.Method);
        if (options.Method == ScoreMethod.Sml && statistics is null)
            throw new ModelException(ModelErrorCodes.StatisticsMissing,
                $"Model '{Path.GetFileName(Path.TrimEndingDirectorySeparator(modelFolder))}' is not calibrated (no calibration.json), and the sml method needs its class statistics. " +
                $"Calibrate it on ordinary frames: strayspot calibrate {modelFolder} <frames-folder>. " +
                "Or choose a method without statistics together with a threshold on that method's scale " +
                "(e.g. --method msp --threshold -0.5 flags pixels whose top class has less than 50% probability).");
    }
}
