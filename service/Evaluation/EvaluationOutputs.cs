using System.Globalization;
using System.Text;
using System.Text.Json;
using ScottPlot;

namespace Strayspot.Service.Evaluation;

/// <summary>Writes an evaluation's files: metrics.md, metrics.csv, metrics.json, frames.csv, roc.png, precision-recall.png.</summary>
public static class EvaluationOutputs
{
    public const string MarkdownFile = "metrics.md", CsvFile = "metrics.csv", JsonFile = "metrics.json", FramesFile = "frames.csv";
    public const string RocFile = "roc.png", PrecisionRecallFile = "precision-recall.png";

    private static readonly CultureInfo Inv = CultureInfo.InvariantCulture;

    public static void WriteAll(EvaluationReport report, EvaluationSettings settings, string folder)
    {
        Directory.CreateDirectory(folder);
        Write(folder, JsonFile, JsonSerializer.SerializeToUtf8Bytes(report, EvaluationReport.JsonOptions));
        Write(folder, MarkdownFile, Encoding.UTF8.GetBytes(Markdown(report, settings)));
        Write(folder, CsvFile, Encoding.UTF8.GetBytes(Csv(report)));
        Write(folder, FramesFile, Encoding.UTF8.GetBytes(FramesCsv(report)));
        Write(folder, RocFile, RocPlot(report));
        Write(folder, PrecisionRecallFile, PrecisionRecallPlot(report));
    }

    private static void Write(string folder, string name, byte[] bytes) => AtomicFile.WriteAllBytes(Path.Combine(folder, name), bytes);

    private static string Pct(double v) => (100 * v).ToString("0.00", Inv);
    private static string Pct(double? v) => v is double d ? Pct(d) : "–";
    private static string Num(double v) => v.ToString("0.####", Inv);
    private static string Num(double? v) => v is double d ? Num(d) : "–";
    private static string Raw(double v) => v.ToString("R", Inv);
    private static string Raw(double? v) => v is double d ? Raw(d) : "";

    public static string Markdown(EvaluationReport r, EvaluationSettings s)
    {
        var op = r.OperatingPoint;
        string tpr = Pct(s.TargetTpr).TrimEnd('0').TrimEnd('.'), fpr = Pct(s.ReportedFpr).TrimEnd('0').TrimEnd('.');
        string target = op.Target == "tpr" ? $"TPR {tpr}%" : $"FPR {fpr}%";
        var b = new StringBuilder();
        b.AppendLine($"# Evaluation of {r.Model} on {Path.GetFileName(r.Dataset)}");
        b.AppendLine();
        b.AppendLine($"{r.Frames} frame(s), {r.Methods[0].Positives:N0} anomaly and {r.Methods[0].Negatives:N0} in-distribution pixels " +
                     $"(ignore pixels left out); {r.Mode} metrics; profile {r.ProfileVersion}. Rates in %.");
        b.AppendLine();
        b.AppendLine($"| method | AUROC | AP | FPR@{tpr}%TPR | TPR@{fpr}%FPR | threshold at {target} |");
        b.AppendLine("|---|---:|---:|---:|---:|---:|");
        foreach (var m in r.Methods)
            b.AppendLine($"| {m.Method} | {Pct(m.Auroc)} | {Pct(m.AveragePrecision)} | {Pct(m.FprAtTpr)} | {Pct(m.TprAtFpr)} | {Num(m.ThresholdAtTarget)} |");
        b.AppendLine();
        b.AppendLine("A pixel counts as flagged when its anomaly score is at or above the threshold (higher = more anomalous).");
        if (r.Mode == "streaming")
        {
            double ap = r.Methods.Max(m => m.Bounds?.AveragePrecision ?? 0), au = r.Methods.Max(m => m.Bounds?.Auroc ?? 0);
            b.AppendLine($"Streaming (histogram) metrics: at most {Pct(au)} points from the exact AUROC and {Pct(ap)} from the exact AP for any method (guaranteed bounds; `--exact` for exact values).");
        }
        b.AppendLine();
        b.AppendLine($"## Operating point ({op.Method}, {target})");
        b.AppendLine();
        b.AppendLine($"Recommended threshold: **{op.ProfileThreshold.ToString("R", Inv)}** (profile rule: flag score > threshold). " +
                     $"Re-counted on every pixel: TPR {Pct(op.AchievedTpr)}%, FPR {Pct(op.AchievedFpr)}%, {op.FlaggedPixels:N0} pixels flagged.");
        if (r.ProfileWritten is not null) b.AppendLine($"Written to the model's profile.json as version `{r.ProfileWritten}`.");
        b.AppendLine();
        var g = r.Regions;
        b.AppendLine($"## Regions ({op.Method} at the recommended threshold)");
        b.AppendLine();
        b.AppendLine("| ground-truth components | predicted components | mean sIoU | mean PPV | mean F1 (τ 0.25–0.75) |");
        b.AppendLine("|---:|---:|---:|---:|---:|");
        b.AppendLine($"| {g.GroundTruthComponents} | {g.PredictedComponents} | {Pct(g.MeanSIoU)} | {Pct(g.MeanPpv)} | {Pct(g.MeanF1)} |");
        if (r.Segmentation is { } q)
        {
            b.AppendLine();
            b.AppendLine("## Segmentation quality");
            b.AppendLine();
            b.AppendLine($"mIoU closed-set {Pct(q.ClosedSetMeanIoU)}%, after removing flagged pixels {Pct(q.OpenSetMeanIoU)}% " +
                         $"({q.FlaggedPixels:N0} flagged, {q.FlaggedCorrect:N0} of them correctly classified).");
            b.AppendLine();
            b.AppendLine("| class | IoU closed-set | IoU flagged removed |");
            b.AppendLine("|---|---:|---:|");
            foreach (var c in q.Classes) b.AppendLine($"| {c.Name} | {Pct(c.ClosedSet)} | {Pct(c.OpenSet)} |");
        }
        if (r.Notes.Count > 0)
        {
            b.AppendLine();
            foreach (var n in r.Notes) b.AppendLine($"- {n}");
        }
        b.AppendLine();
        b.AppendLine("A data-triage and monitoring aid, not a certified safety function.");
        return b.ToString();
    }

    public static string Csv(EvaluationReport r)
    {
        var b = new StringBuilder();
        b.AppendLine("method,auroc,average_precision,fpr_at_tpr,tpr_target,tpr_at_fpr,fpr_target,threshold_at_target,positives,negatives,clamped,auroc_bound,ap_bound");
        foreach (var m in r.Methods)
            b.AppendLine(string.Join(',', m.Method, Raw(m.Auroc), Raw(m.AveragePrecision), Raw(m.FprAtTpr), Raw(m.TprTarget), Raw(m.TprAtFpr),
                Raw(m.FprTarget), Raw(m.ThresholdAtTarget), m.Positives.ToString(Inv), m.Negatives.ToString(Inv), m.Clamped.ToString(Inv),
                Raw(m.Bounds?.Auroc), Raw(m.Bounds?.AveragePrecision)));
        return b.ToString();
    }

    public static string FramesCsv(EvaluationReport r)
    {
        var b = new StringBuilder();
        b.AppendLine("frame,frame_score,flagged_share,flagged_pixels,anomaly_pixels,regions,false_positive_regions," +
                     "worst_fp_left,worst_fp_top,worst_fp_width,worst_fp_height,worst_fp_area,worst_fp_mean_score,worst_fp_max_score");
        foreach (var f in r.FrameRows)
        {
            var w = f.WorstFalsePositive;
            b.AppendLine(string.Join(',', Quote(f.Frame), f.FrameScore.ToString("R", Inv), Raw(f.FlaggedShare), f.FlaggedPixels.ToString(Inv),
                f.AnomalyPixels.ToString(Inv), f.Regions.ToString(Inv), f.FalsePositiveRegions.ToString(Inv),
                w?.Left.ToString(Inv) ?? "", w?.Top.ToString(Inv) ?? "", w?.Width.ToString(Inv) ?? "", w?.Height.ToString(Inv) ?? "",
                w?.Area.ToString(Inv) ?? "", w?.MeanScore.ToString("R", Inv) ?? "", w?.MaxScore.ToString("R", Inv) ?? ""));
        }
        return b.ToString();
    }

    private static string Quote(string s) => s.IndexOfAny([',', '"', '\n']) < 0 ? s : "\"" + s.Replace("\"", "\"\"") + "\"";

    /// <summary>The low false-positive end of the ROC, where an operating point lives, shown enlarged beside the whole curve.</summary>
    public const double ZoomedFpr = 0.10;

    /// <summary>
    /// Two panels: the whole ROC, and the same curves for FPR ≤ 10% only, since a linear axis squeezes every useful
    /// operating point into the left edge. The TPR target is drawn across both.
    /// </summary>
    public static byte[] RocPlot(EvaluationReport r)
    {
        var whole = new Plot();
        var zoom = new Plot();
        double target = r.Methods.Count > 0 ? r.Methods[0].TprTarget : 0.95;
        foreach (var plot in new[] { whole, zoom })
        {
            foreach (var (method, curves) in r.Curves)
            {
                var line = plot.Add.ScatterLine(curves.Roc.Select(p => p.Fpr).ToArray(), curves.Roc.Select(p => p.Tpr).ToArray());
                var m = r.Methods.First(x => x.Method == method);
                line.LegendText = plot == whole
                    ? Legend(r, method, m.Auroc, "AUROC")
                    : $"{method} (FPR {Pct(m.FprAtTpr)}% at TPR {Pct(target).TrimEnd('0').TrimEnd('.')}%)";
                line.LineWidth = 2;
            }
            var guide = plot.Add.HorizontalLine(target);
            guide.LinePattern = LinePattern.Dashed;
            guide.LineWidth = 1;
            guide.Color = Colors.Gray;
            guide.LegendText = $"TPR {Pct(target).TrimEnd('0').TrimEnd('.')}% (the FPR-at-TPR target)";
            plot.YLabel("true-positive rate");
            plot.ShowLegend(Alignment.LowerRight);
        }
        whole.Title($"ROC, {r.Model} on {Path.GetFileName(r.Dataset)} ({r.Frames} frames)");
        whole.XLabel("false-positive rate");
        whole.Axes.SetLimits(0, 1, 0, 1.02);
        zoom.Title($"The same, FPR ≤ {Pct(ZoomedFpr).TrimEnd('0').TrimEnd('.')}% enlarged");
        zoom.XLabel("false-positive rate (zoomed)");
        zoom.Axes.SetLimits(0, ZoomedFpr, 0, 1.02);
        var both = new Multiplot();
        both.Reset(whole); // a new multiplot starts with an empty plot of its own
        both.AddPlot(zoom);
        both.Layout = new ScottPlot.MultiplotLayouts.Columns();
        return both.Render(1500, 650).GetImageBytes(ImageFormat.Png);
    }

    public static byte[] PrecisionRecallPlot(EvaluationReport r)
    {
        var plot = new Plot();
        foreach (var (method, curves) in r.Curves)
        {
            var pr = curves.PrecisionRecall;
            var line = plot.Add.ScatterLine(pr.Select(p => p.Recall).ToArray(), pr.Select(p => p.Precision).ToArray());
            line.LegendText = Legend(r, method, r.Methods.First(m => m.Method == method).AveragePrecision, "AP");
            line.LineWidth = 2;
        }
        plot.Title($"Precision–recall, {r.Model} on {Path.GetFileName(r.Dataset)} ({r.Frames} frames)");
        plot.XLabel("recall (true-positive rate)");
        plot.YLabel("precision");
        plot.Axes.SetLimits(0, 1, 0, 1.02);
        plot.ShowLegend(Alignment.LowerLeft); // the lower left stays empty: low recall comes with high precision
        return plot.GetImageBytes(900, 650, ImageFormat.Png);
    }

    private static string Legend(EvaluationReport r, string method, double value, string metric) =>
        $"{method} ({metric} {Pct(value)}%)";
}
