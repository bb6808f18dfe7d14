using System.Globalization;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Calibration;

namespace Strayspot.Service.Reports;

/// <summary>Something about a frame's scoring the user should know; <see cref="Code"/> is stable.</summary>
public sealed record ReportWarning(
    [property: JsonPropertyName("code")] string Code,
    [property: JsonPropertyName("message")] string Message);

/// <summary>
/// The conditions under which a frame scores but its result deserves doubt. Each lands in the frame report's
/// <c>warnings</c> array, so nothing a user set up wrong scores silently.
/// </summary>
public static class ScoringWarnings
{
    public const string StatisticsUnbound = "statistics-unbound";
    public const string FrameSizeDiffers = "frame-size-differs";
    public const string ThresholdOutOfRange = "threshold-out-of-range";

    /// <summary>A frame whose width differs from the calibration frames' by more than this factor (either way) is warned about.</summary>
    public const double FrameSizeFactor = 1.5;

    public static List<ReportWarning> For(int frameWidth, int frameHeight, ScoringOptions options, int classCount,
        CalibrationArtifact? calibration, string? statisticsSource)
    {
        var warnings = new List<ReportWarning>();
        if (options.Method == ScoreMethod.Sml && statisticsSource is not null && calibration is null)
            warnings.Add(new(StatisticsUnbound,
                $"The class statistics come from {statisticsSource}, which records neither the weights nor the preprocessing it was measured with; " +
                "run 'strayspot calibrate' to replace it with a calibration.json that is checked against both."));
        if (calibration?.MeasuredWith?.FrameSize is { } at)
        {
            double ratio = (double)frameWidth / at.Width;
            if (ratio > FrameSizeFactor || ratio < 1 / FrameSizeFactor)
                warnings.Add(new(FrameSizeDiffers,
                    F($"The frame is {frameWidth}×{frameHeight}, but the calibration was measured on {at.Width}×{at.Height} frames (the profile was tuned near that size). ") +
                    F($"Boundary width, smoothing dilation and minimum region area count pixels, so at {ratio:0.##}× the width they cover a different share of the scene: ") +
                    "calibrate and tune the profile on frames of this size, or resize frames to the calibrated width."));
        }
        var (low, high) = ScoreMethodInputs.ScoreBounds(options.Method, classCount);
        if ((high is double h && options.Threshold >= h) || (low is double l && options.Threshold < l))
            warnings.Add(new(ThresholdOutOfRange,
                F($"The threshold {options.Threshold} lies outside the scores the {MethodName(options.Method)} method can give ({low:0.####} to {high:0.####}), ") +
                "so the mask is all or nothing; choose a threshold on that scale (evaluate --write-profile measures one)."));
        return warnings;
    }

    private static string F(FormattableString s) => FormattableString.Invariant(s);

    private static string MethodName(ScoreMethod m) => System.Text.Json.JsonSerializer.Serialize(m).Trim('"');
}
