using System.Text.Json.Serialization;
using Strayspot.Scoring.Evaluation;

namespace Strayspot.Service.Evaluation;

/// <summary>One point of the trade-off: at this false-positive rate, this true-positive rate (and the other way round).</summary>
public sealed record TradeOffPoint([property: JsonPropertyName("fpr")] double Fpr, [property: JsonPropertyName("tpr")] double Tpr);

/// <summary>
/// What the recommended operating point costs, printed beside it: TPR at a few FPRs, FPR at a few TPRs (read off the
/// primary method's ROC curve), and the share of ordinary (in-distribution) pixels the chosen threshold flags.
/// </summary>
public sealed record OperatingTradeOff(
    [property: JsonPropertyName("tprAtFpr")] IReadOnlyList<TradeOffPoint> TprAtFpr,
    [property: JsonPropertyName("fprAtTpr")] IReadOnlyList<TradeOffPoint> FprAtTpr,
    [property: JsonPropertyName("flaggedOrdinaryShare")] double FlaggedOrdinaryShare)
{
    /// <summary>A profile whose threshold flags more than this share of ordinary pixels is not written unless forced.</summary>
    public const double MaxFlaggedOrdinaryShare = 0.10;

    public static readonly double[] Fprs = [0.01, 0.05, 0.10];
    public static readonly double[] Tprs = [0.80, 0.90, 0.95];

    public bool FlagsTooMuch => FlaggedOrdinaryShare > MaxFlaggedOrdinaryShare;

    public static OperatingTradeOff From(PixelCurves? curves, double flaggedOrdinaryShare)
    {
        var roc = curves?.Roc ?? [];
        var atFpr = new List<TradeOffPoint>();
        foreach (double f in Fprs)
        {
            double best = 0;
            foreach (var p in roc) if (p.Fpr <= f && p.Tpr > best) best = p.Tpr;
            atFpr.Add(new(f, best));
        }
        var atTpr = new List<TradeOffPoint>();
        foreach (double t in Tprs)
        {
            double best = 1;
            foreach (var p in roc) if (p.Tpr >= t && p.Fpr < best) best = p.Fpr;
            atTpr.Add(new(best, t));
        }
        return new OperatingTradeOff(atFpr, atTpr, flaggedOrdinaryShare);
    }
}
