using System.CommandLine;
using System.Globalization;
using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Evaluation;
using Strayspot.Service.Models;

namespace Strayspot.Service.Cli;

/// <summary>
/// <c>strayspot evaluate &lt;model-folder&gt; &lt;dataset-folder&gt; --out &lt;dir&gt;</c>: compares every anomaly score on a
/// labelled dataset, recommends a threshold for a target TPR (or FPR) and optionally writes it as a new profile version.
/// </summary>
public static class EvaluateVerb
{
    public static Command Create()
    {
        var model = new Argument<DirectoryInfo>("model-folder") { Description = "model folder (model.onnx, descriptor.json, calibration.json or statistics.json, optional profile.json)" };
        var dataset = new Argument<DirectoryInfo>("dataset-folder")
        {
            Description = "frames/<id>.png|jpg + masks/<id>.png [+ labels/<id>.png], or frame_<id>.png + mask_<id>.png [+ labels_<id>.png] " +
                          "side by side; masks: 0 in-distribution, 1 anomaly, 255 ignore",
        };
        var output = new Option<DirectoryInfo>("--out") { Description = "output folder", Required = true };
        var exact = new Option<bool>("--exact") { Description = "exact metrics (keeps every pixel's score) instead of fixed-memory histograms" };
        var targetTpr = new Option<double?>("--target-tpr") { Description = "operating point: true-positive rate to reach (default 0.95)" };
        var targetFpr = new Option<double?>("--target-fpr") { Description = "operating point: false-positive rate not to exceed (instead of --target-tpr)" };
        var writeProfile = new Option<bool>("--write-profile") { Description = "save the recommended threshold into the model's profile.json as a new version" };
        var force = new Option<bool>("--force-profile") { Description = "with --write-profile: write it even when its threshold flags more than 10% of ordinary pixels" };
        var threads = new Option<int?>("--threads") { Description = "ONNX Runtime intra-op threads (default: cores)" };
        var command = new Command("evaluate", "Measure every anomaly score on labelled frames, recommend a threshold, write metrics and plots.");
        command.Arguments.Add(model);
        command.Arguments.Add(dataset);
        foreach (var o in new Option[] { output, exact, targetTpr, targetFpr, writeProfile, force, threads }) command.Options.Add(o);
        command.SetAction(p => CliApp.Guard(() =>
        {
            double? tpr = p.GetValue(targetTpr), fpr = p.GetValue(targetFpr);
            if (tpr is not null && fpr is not null)
                throw new ScoringInputException(EvaluationErrorCodes.Argument, "Give either --target-tpr or --target-fpr, not both.");
            var settings = new EvaluationSettings
            {
                Exact = p.GetValue(exact),
                TargetTpr = tpr ?? 0.95,
                TargetFpr = fpr,
                WriteProfile = p.GetValue(writeProfile),
                ForceProfile = p.GetValue(force),
            };
            var runtime = p.GetValue(threads) is { } t ? new ModelRuntimeOptions { IntraOpThreads = t } : null;
            string modelFolder = p.GetValue(model)!.FullName, outFolder = p.GetValue(output)!.FullName;
            string datasetFolder = p.GetValue(dataset)!.FullName;
            Evaluator.Validate(settings);
            if (!Directory.Exists(modelFolder)) Models.SegmentationModel.EnsureFolder(modelFolder);
            using var bundle = Inference.ModelBundle.Load(modelFolder, runtime);
            var set = EvaluationDataset.Open(datasetFolder, bundle.Model.ClassCount);
            Console.WriteLine($"evaluating {bundle.Name} on {set.Items.Count} frame(s) ({set.Layout} layout{(set.HasLabels ? ", with class labels" : "")})");
            var report = FrameProgress.Run("evaluating", set.Items.Count, Console.Out, progress => Evaluator.Run(bundle, set, outFolder, settings, progress));
            Print(report);
            Console.WriteLine($"wrote {EvaluationOutputs.MarkdownFile}, {EvaluationOutputs.CsvFile}, {EvaluationOutputs.JsonFile}, {EvaluationOutputs.FramesFile}, " +
                              $"{EvaluationOutputs.RocFile}, {EvaluationOutputs.PrecisionRecallFile} into {outFolder}");
            if (report.ProfileRefused is not null)
            {
                Console.Error.WriteLine($"error [profile-flags-too-much]: {report.ProfileRefused}");
                return CliApp.ExitBadInput;
            }
            return CliApp.ExitOk;
        }));
        return command;
    }

    private static void Print(EvaluationReport r)
    {
        var inv = CultureInfo.InvariantCulture;
        string fprAt = string.Create(inv, $"FPR at {100 * (r.Methods.Count > 0 ? r.Methods[0].TprTarget : 0.95):0.##}% TPR");
        Console.WriteLine(string.Create(inv, $"  {"method",-24} {"AUROC",7} {"AP",7} {fprAt,17}   (all in %)"));
        foreach (var m in r.Methods)
            Console.WriteLine(string.Create(inv, $"  {m.Method,-24} {100 * m.Auroc,7:0.00} {100 * m.AveragePrecision,7:0.00} {100 * m.FprAtTpr,17:0.00}"));
        var op = r.OperatingPoint;
        Console.WriteLine(string.Create(inv,
            $"recommended threshold for {op.Method} at {op.Target.ToUpperInvariant()} {op.TargetValue}: {op.ProfileThreshold:R} (TPR {100 * op.AchievedTpr:0.00}%, FPR {100 * op.AchievedFpr:0.00}%)"));
        if (r.TradeOff is { } t)
        {
            Console.WriteLine("  trade-off of " + op.Method + " (from its ROC curve): " +
                string.Join(", ", t.TprAtFpr.Select(x => string.Create(inv, $"TPR {100 * x.Tpr:0.#}% at FPR {100 * x.Fpr:0}%"))) + "; " +
                string.Join(", ", t.FprAtTpr.Select(x => string.Create(inv, $"FPR {100 * x.Fpr:0.#}% at TPR {100 * x.Tpr:0}%"))));
            Console.WriteLine(string.Create(inv, $"  the recommended threshold flags {100 * t.FlaggedOrdinaryShare:0.##}% of ordinary pixels"));
            if (t.FlagsTooMuch)
                Console.WriteLine(string.Create(inv, $"warning: that is more than {100 * OperatingTradeOff.MaxFlaggedOrdinaryShare:0}%: most flagged pixels would be ordinary ones"));
        }
        if (r.ProfileWritten is not null) Console.WriteLine($"profile.json: new version {r.ProfileWritten}");
        foreach (var n in r.Notes) Console.WriteLine($"note: {n}");
    }
}
