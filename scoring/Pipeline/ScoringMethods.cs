using System.Numerics.Tensors;
using Strayspot.Scoring.Reduction;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Scoring.Pipeline;

/// <summary>
/// Makes one frame's anomaly score (higher = more anomalous) from the reduced maps; <paramref name="sml"/> is
/// given exactly when the method needs class statistics.
/// </summary>
public delegate void AnomalyScoreKernel(ReducedMaps maps, StandardizedMaxLogit? sml, Span<float> score);

/// <summary>One scoring method: its names, what the reduction must compute for it, and how its score is made.</summary>
/// <param name="Name">As the API, the JSON (reports, profiles) and the evaluation spell it.</param>
/// <param name="CliAliases">Further spellings the command line accepts.</param>
/// <param name="Outputs">Reduction outputs read besides class and max logit.</param>
/// <param name="NeedsStatistics">Needs per-class statistics from a calibration.</param>
public sealed record ScoringMethod(
    ScoreMethod Id,
    string Name,
    IReadOnlyList<string> CliAliases,
    ReductionOutputs Outputs,
    bool NeedsStatistics,
    string Description,
    AnomalyScoreKernel Kernel);

/// <summary>
/// The table of scoring methods. <see cref="FramePipeline"/>, the evaluation's multi-method scorer and every parser
/// (API form, command line) read it: adding a method is one <see cref="ScoreMethod"/> member, one entry here and
/// its kernel (plus its row in the evaluation's method list, which a test holds to this table).
/// </summary>
public static class ScoringMethods
{
    // One sign convention everywhere: higher means more anomalous.
    public static IReadOnlyList<ScoringMethod> All { get; } =
    [
        new(ScoreMethod.Msp, "msp", [], ReductionOutputs.Msp, false,
            "max softmax probability; anomaly score = −MSP",
            (maps, _, score) => TensorPrimitives.Negate(maps.Msp, score)),
        new(ScoreMethod.MaxLogit, "maxlogit", ["max-logit"], ReductionOutputs.None, false,
            "max logit; anomaly score = −max logit",
            (maps, _, score) => TensorPrimitives.Negate(maps.MaxLogit, score)),
        new(ScoreMethod.Entropy, "entropy", [], ReductionOutputs.Entropy, false,
            "softmax entropy in nats; anomaly score = entropy",
            (maps, _, score) => maps.Entropy.CopyTo(score)),
        new(ScoreMethod.Energy, "energy", [], ReductionOutputs.Energy, false,
            "energy −T·logsumexp(l/T); anomaly score = energy",
            (maps, _, score) => maps.Energy.CopyTo(score)),
        new(ScoreMethod.Sml, "sml", [], ReductionOutputs.None, true,
            "standardized max logit with the calibration's class statistics; anomaly score = −SML",
            (maps, sml, score) => sml!.ApplyNegated(maps.MaxLogit, maps.ClassIndex, score)),
    ];

    private static readonly ScoringMethod?[] ById = Index();

    public static ScoringMethod Of(ScoreMethod id) =>
        (int)id >= 0 && (int)id < ById.Length && ById[(int)id] is { } m ? m
            : throw new Logits.ScoringInputException(Logits.ScoringErrorCodes.Options, $"Unknown scoring method {(int)id}.");

    /// <summary>The API's and JSON's names, comma-separated, for messages.</summary>
    public static string Names => string.Join(", ", All.Select(m => m.Name));

    /// <summary>A method by its name (case-insensitive); the command line's aliases too when <paramref name="cliAliases"/>.</summary>
    public static bool TryParse(string? text, bool cliAliases, out ScoreMethod method)
    {
        string t = (text ?? "").Trim();
        foreach (var m in All)
        {
            if (string.Equals(m.Name, t, StringComparison.OrdinalIgnoreCase)
                || (cliAliases && m.CliAliases.Any(a => string.Equals(a, t, StringComparison.OrdinalIgnoreCase))))
            {
                method = m.Id;
                return true;
            }
        }
        method = default;
        return false;
    }

    /// <summary>The union of the reduction outputs <paramref name="methods"/> read.</summary>
    public static ReductionOutputs OutputsOf(IEnumerable<ScoreMethod> methods)
    {
        var outputs = ReductionOutputs.None;
        foreach (var m in methods) outputs |= Of(m).Outputs;
        return outputs;
    }

    private static ScoringMethod?[] Index()
    {
        var byId = new ScoringMethod?[All.Max(m => (int)m.Id) + 1];
        foreach (var m in All)
        {
            if (byId[(int)m.Id] is not null) throw new InvalidOperationException($"Scoring method {m.Id} is listed twice.");
            byId[(int)m.Id] = m;
        }
        return byId;
    }
}
