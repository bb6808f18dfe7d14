using System.CommandLine;
using System.Globalization;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Service.Cli;

/// <summary>
/// The scoring options as command-line options, shared by every verb that scores. Each is named after its JSON field in
/// a profile or report (<c>--boundary-iterations</c> ↔ <c>boundarySuppression.iterations</c>, <c>--kernel-size</c> ↔
/// <c>smoothing.kernelSize</c>, <c>--minimum-region-area</c> ↔ <c>minimumRegionArea</c>); the older short names stay as aliases.
/// </summary>
public sealed class ScoringOptionsBinding
{
    public Option<string?> Method { get; } = new("--method") { Description = "msp | maxlogit | entropy | energy | sml (default: the profile's, else sml)" };
    public Option<float?> Threshold { get; } = new("--threshold") { Description = "anomaly-score threshold for the mask" };
    public Option<bool> NoBoundary { get; } = new("--no-boundary-suppression") { Description = "turn boundary suppression off" };
    public Option<int?> BoundaryWidth { get; } = new("--boundary-initial-width", "--boundary-width") { Description = "r0, first-round boundary width (pixels); boundarySuppression.initialWidth" };
    public Option<int?> BoundaryStep { get; } = new("--boundary-width-step", "--boundary-step") { Description = "Δr, width shrink per round; boundarySuppression.widthStep" };
    public Option<int?> BoundaryRounds { get; } = new("--boundary-iterations", "--boundary-rounds") { Description = "n, number of rounds; boundarySuppression.iterations" };
    public Option<bool> NoSmoothing { get; } = new("--no-smoothing") { Description = "turn dilated smoothing off" };
    public Option<int?> Kernel { get; } = new("--kernel-size", "--kernel") { Description = "k, Gaussian taps per side (odd); smoothing.kernelSize" };
    public Option<double?> Sigma { get; } = new("--sigma") { Description = "σ of the Gaussian, in taps" };
    public Option<int?> Dilation { get; } = new("--dilation") { Description = "d, pixels between taps" };
    public Option<int?> MinArea { get; } = new("--minimum-region-area", "--min-area") { Description = "smallest region kept, pixels; minimumRegionArea" };
    public Option<double?> Temperature { get; } = new("--energy-temperature") { Description = "T of the energy score" };

    public void AddTo(Command command)
    {
        foreach (var o in new Option[] { Method, Threshold, NoBoundary, BoundaryWidth, BoundaryStep, BoundaryRounds, NoSmoothing, Kernel, Sigma, Dilation, MinArea, Temperature })
            command.Options.Add(o);
    }

    /// <summary>The given base options with whatever the user set on the command line.</summary>
    public ScoringOptions Apply(ParseResult p, ScoringOptions baseOptions)
    {
        var o = baseOptions;
        if (p.GetValue(Method) is { } m) o = o with { Method = ParseMethod(m) };
        if (p.GetValue(Threshold) is { } t) o = o with { Threshold = t };
        if (p.GetValue(Temperature) is { } temp) o = o with { EnergyTemperature = temp };
        if (p.GetValue(MinArea) is { } a) o = o with { MinimumRegionArea = a };
        var b = o.BoundarySuppression;
        if (p.GetValue(NoBoundary)) b = b with { Enabled = false };
        if (p.GetValue(BoundaryWidth) is { } bw) b = b with { InitialWidth = bw };
        if (p.GetValue(BoundaryStep) is { } bs) b = b with { WidthStep = bs };
        if (p.GetValue(BoundaryRounds) is { } bn) b = b with { Iterations = bn };
        var s = o.Smoothing;
        if (p.GetValue(NoSmoothing)) s = s with { Enabled = false };
        if (p.GetValue(Kernel) is { } k) s = s with { KernelSize = k };
        if (p.GetValue(Sigma) is { } sg) s = s with { Sigma = sg };
        if (p.GetValue(Dilation) is { } d) s = s with { Dilation = d };
        o = o with { BoundarySuppression = b, Smoothing = s };
        o.Validate();
        return o;
    }

    public static ScoreMethod ParseMethod(string text) => text.Trim().ToLowerInvariant() switch
    {
        "msp" => ScoreMethod.Msp,
        "maxlogit" or "max-logit" => ScoreMethod.MaxLogit,
        "entropy" => ScoreMethod.Entropy,
        "energy" => ScoreMethod.Energy,
        "sml" => ScoreMethod.Sml,
        _ => throw new ScoringInputException(ScoringErrorCodes.Options,
            $"Unknown method '{text}'; choose msp, maxlogit, entropy, energy or sml."),
    };

    /// <summary>Parses "WIDTHxHEIGHT", e.g. 2048x1024.</summary>
    public static (int Width, int Height) ParseSize(string text)
    {
        var parts = text.ToLowerInvariant().Split('x');
        if (parts.Length == 2
            && int.TryParse(parts[0], NumberStyles.None, CultureInfo.InvariantCulture, out int w)
            && int.TryParse(parts[1], NumberStyles.None, CultureInfo.InvariantCulture, out int h)
            && w >= 1 && h >= 1 && (long)w * h <= 100_000_000)
            return (w, h);
        throw new ScoringInputException(ScoringErrorCodes.FrameSize,
            $"Frame size must be WIDTHxHEIGHT with positive numbers and at most 100 megapixels; got '{text}'.");
    }
}
