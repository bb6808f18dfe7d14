using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Regions;
using Strayspot.Service.Cli;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Service.Profiles;

namespace Strayspot.Service.Evaluation;

/// <summary>
/// Runs a model over a labelled dataset once per frame, compares every anomaly score (the seven methods of
/// <see cref="MultiMethodScorer"/>), picks an operating point for the primary method (the full method; max logit
/// when the model has no statistics) and writes the metrics, plots and per-frame rows.
/// </summary>
public static class Evaluator
{
    /// <summary>PPV at or below this makes a found region a false positive: the lowest level of the region F1 summary.</summary>
    public const double FalsePositivePpv = 0.25;

    public static EvaluationReport Run(string modelFolder, string datasetFolder, string outFolder, EvaluationSettings settings,
        IProgress<FrameCount>? progress = null, ModelRuntimeOptions? runtime = null)
    {
        Validate(settings);
        if (!Directory.Exists(modelFolder)) SegmentationModel.EnsureFolder(modelFolder);
        using var bundle = ModelBundle.Load(modelFolder, runtime);
        var dataset = EvaluationDataset.Open(datasetFolder, bundle.Model.ClassCount);
        return Run(bundle, dataset, outFolder, settings, progress);
    }

    public static void Validate(EvaluationSettings settings)
    {
        if (!(settings.TargetTpr > 0 && settings.TargetTpr <= 1))
            throw new ScoringInputException(EvaluationErrorCodes.Argument, $"--target-tpr must be in (0, 1]; got {settings.TargetTpr}.");
        if (settings.TargetFpr is double f && !(f > 0 && f < 1))
            throw new ScoringInputException(EvaluationErrorCodes.Argument, $"--target-fpr must be in (0, 1); got {f}.");
    }

    public static EvaluationReport Run(ModelBundle bundle, EvaluationDataset dataset, string outFolder, EvaluationSettings settings,
        IProgress<FrameCount>? progress = null)
    {
        Validate(settings);
        var notes = new List<string>();
        var profileOptions = bundle.Profile.Effective;
        bool sml = bundle.Statistics is not null;
        IReadOnlyList<EvaluatedMethod> methods = sml ? EvaluatedMethods.All : EvaluatedMethods.All.Where(m => !EvaluatedMethods.NeedsStatistics(m)).ToList();
        var primary = sml ? EvaluatedMethod.Full : EvaluatedMethod.MaxLogit;
        if (!sml) notes.Add("The model has no calibration.json or statistics.json: the SML methods were left out and the operating point is for max logit.");
        if (bundle.Model.OutputsProbabilities)
        {
            // [setup] Softmax outputs carry no logits: only the methods defined on probabilities are measured.
            methods = methods.Where(m => m is EvaluatedMethod.Msp or EvaluatedMethod.Entropy).ToList();
            primary = EvaluatedMethod.Msp;
            notes.Add("The model outputs probabilities (output.kind): only msp and entropy are defined on them, so max logit, energy and the SML methods were left out and the operating point is for msp.");
        }
        var scorer = new MultiMethodScorer(bundle.Statistics, new MultiMethodOptions
        {
            Base = profileOptions, Methods = methods, Exact = settings.Exact, Bins = settings.Bins,
        });
        Directory.CreateDirectory(outFolder);
        int count = dataset.Items.Count;
        var frameScores = new float[count];
        using var spill = new FrameSpill(outFolder);
        var decoder = new FrameDecoder();
        var preprocessor = new FramePreprocessor(bundle.Model.Descriptor.Input);
        float[]? crop = null;
        long start = System.Diagnostics.Stopwatch.GetTimestamp();
        for (int i = 0; i < count; i++)
        {
            var item = dataset.Items[i];
            using var frame = decoder.DecodeFile(item.FramePath);
            var mask = EvaluationDataset.ReadChecked(item.MaskPath);
            if (mask.Length != frame.Width * frame.Height)
                throw new ScoringInputException(DatasetErrorCodes.Invalid,
                    $"{item.FramePath} decodes to {frame.Width}×{frame.Height} (after its EXIF orientation) but its mask has {mask.Length} pixels.");
            var input = preprocessor.Prepare(frame);
            using (var lease = bundle.Model.Run(input))
            {
                // Exactly FrameScorer's path: padding cut off, scored at the frame's own size.
                var logits = input.Box.CropToContent(lease.View, ref crop);
                scorer.Score(logits, frame.Height, frame.Width);
            }
            scorer.Accumulate(mask);
            var map = scorer.Map(primary);
            frameScores[i] = FrameScore.Compute(map);
            spill.Write(frame.Width, frame.Height, map, scorer.ClassIndex, mask);
            progress?.Report(new FrameCount(i + 1, count));
        }

        var metrics = scorer.Compute(settings.TargetTpr, settings.ReportedFpr, curves: true);
        long firstPass = System.Diagnostics.Stopwatch.GetTimestamp();
        var rows = metrics.Select(m => Row(m, settings)).ToList();
        var primaryMetrics = metrics.Single(m => m.Method == primary).Pixels;
        double metricThreshold = settings.TargetFpr is null ? primaryMetrics.ThresholdAtTpr : primaryMetrics.ThresholdAtFpr!.Value;
        float profileThreshold = StrictThreshold(metricThreshold);
        if (!settings.Exact && metrics.Any(m => m.Clamped > 0))
            notes.Add("Some scores fell outside a method's histogram range and were counted in its end bins (see 'clamped'); --exact avoids this.");

        var second = SecondPass(spill, dataset, bundle, profileOptions, profileThreshold, frameScores);
        long secondPass = System.Diagnostics.Stopwatch.GetTimestamp();
        var operatingPoint = new OperatingPoint(EvaluatedMethods.Name(primary), settings.TargetKind, settings.TargetValue,
            metricThreshold, profileThreshold, second.Tpr, second.Fpr, second.Flagged);

        var tradeOff = OperatingTradeOff.From(primaryMetrics.Curves, second.Fpr);
        string? written = null, refused = null;
        if (settings.WriteProfile && tradeOff.FlagsTooMuch && !settings.ForceProfile)
        {
            refused = string.Create(System.Globalization.CultureInfo.InvariantCulture,
                $"profile.json was not written: its threshold flags {100 * second.Fpr:0.#}% of ordinary pixels, more than {100 * OperatingTradeOff.MaxFlaggedOrdinaryShare:0}%. ") +
                "Choose a stricter point (--target-fpr, or a lower --target-tpr), or pass --force-profile to write it anyway.";
            notes.Add(refused);
        }
        else if (settings.WriteProfile)
            written = WriteProfile(bundle, primary, profileOptions, profileThreshold, dataset, settings);

        var report = new EvaluationReport(bundle.Name, bundle.Model.ModelSha256, bundle.Profile.Version, dataset.Root, dataset.Layout,
            count, settings.Exact ? "exact" : "streaming", rows, operatingPoint, second.Regions, second.Segmentation, written, notes)
        {
            FrameRows = second.Frames,
            TradeOff = tradeOff,
            ProfileRefused = refused,
            Curves = metrics.Where(m => m.Pixels.Curves is not null).Select(m => (m.Name, m.Pixels.Curves!)).ToList(),
        };
        EvaluationOutputs.WriteAll(report, settings, outFolder);
        long end = System.Diagnostics.Stopwatch.GetTimestamp();
        return report with
        {
            Timings = new EvaluationTimings(System.Diagnostics.Stopwatch.GetElapsedTime(start, firstPass),
                System.Diagnostics.Stopwatch.GetElapsedTime(firstPass, secondPass), System.Diagnostics.Stopwatch.GetElapsedTime(secondPass, end)),
        };
    }

    private static MethodRow Row(MethodMetrics m, EvaluationSettings settings)
    {
        var p = m.Pixels;
        double threshold = settings.TargetFpr is null ? p.ThresholdAtTpr : p.ThresholdAtFpr!.Value;
        return new MethodRow(m.Name, p.Auroc, p.AveragePrecision, p.FprAtTpr, p.TprTarget, p.TprAtFpr, settings.ReportedFpr,
            threshold, p.Positives, p.Negatives, m.Clamped, p.ErrorBounds);
    }

    /// <summary>The pipeline flags <c>score &gt; t</c>, the metrics <c>score ≥ m</c>: t is the largest float below the smallest float ≥ m.</summary>
    public static float StrictThreshold(double metricThreshold)
    {
        if (!double.IsFinite(metricThreshold))
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"The operating point's threshold is {metricThreshold}, which no profile can hold; choose another target.");
        float f = (float)metricThreshold;
        if (f < metricThreshold) f = MathF.BitIncrement(f);
        return MathF.BitDecrement(f);
    }

    private sealed record SecondPassResult(RegionMetricsResult Regions, SegmentationSummary? Segmentation, List<FrameRow> Frames,
        double Tpr, double Fpr, long Flagged);

    /// <summary>Everything that needs the threshold: region metrics, achieved rates, per-frame rows, segmentation quality.</summary>
    private static SecondPassResult SecondPass(FrameSpill spill, EvaluationDataset dataset, ModelBundle bundle, ScoringOptions options,
        float threshold, float[] frameScores)
    {
        int classCount = bundle.Model.ClassCount;
        var regionMetrics = new RegionMetrics();
        var finder = new RegionFinder();
        var filter = options.RegionFilter();
        SegmentationQuality? quality = null;
        if (dataset.HasLabels)
        {
            if (classCount > 255)
                throw new ScoringInputException(DatasetErrorCodes.Invalid,
                    $"8-bit class label maps cannot label a model with {classCount} classes (255 means unlabelled).");
            quality = new SegmentationQuality(classCount, 255);
        }
        var rows = new List<FrameRow>(spill.Frames);
        byte[] mask = [];
        ushort[] truth = [];
        long[] pos = [], bg = [];
        long tp = 0, fp = 0, positives = 0, negatives = 0, flaggedTotal = 0;
        spill.ReadAll((f, width, height, score, classIndex, labels) =>
        {
            int n = width * height;
            if (mask.Length < n) { mask = new byte[n]; truth = new ushort[n]; }
            var m = mask.AsSpan(0, n);
            long flagged = AnomalyMask.Threshold(score, threshold, m);
            flaggedTotal += flagged;
            regionMetrics.Add(m, labels, width, height);
            long anomaly = 0;
            for (int i = 0; i < n; i++)
            {
                byte l = labels[i];
                if (l == 1) { anomaly++; tp += m[i]; }
                else if (l == 0) { negatives++; fp += m[i]; }
            }
            positives += anomaly;

            var regions = finder.Find(m, width, height, score, classIndex, classCount, filter);
            int r = regions.Regions.Count;
            if (pos.Length < r + 1) { pos = new long[r + 1]; bg = new long[r + 1]; }
            Array.Clear(pos, 0, r + 1);
            Array.Clear(bg, 0, r + 1);
            if (r > 0)
            {
                var ids = regions.Labels;
                for (int i = 0; i < n; i++)
                {
                    int id = ids[i];
                    if (id == 0) continue;
                    if (labels[i] == 1) pos[id]++;
                    else if (labels[i] == 0) bg[id]++;
                }
            }
            int falsePositives = 0;
            WorstRegion? worst = null;
            foreach (var region in regions.Regions)
            {
                long counted = pos[region.Id] + bg[region.Id];
                if (counted == 0) continue;
                double ppv = (double)pos[region.Id] / counted;
                if (ppv > FalsePositivePpv) continue;
                falsePositives++;
                if (worst is null || region.Area > worst.Area || (region.Area == worst.Area && region.MeanScore > worst.MeanScore))
                    worst = new WorstRegion(region.Left, region.Top, region.Width, region.Height, region.Area, region.MeanScore, region.MaxScore, ppv);
            }
            var item = dataset.Items[f];
            rows.Add(new FrameRow(item.Id, frameScores[f], (double)flagged / n, flagged, anomaly, r, falsePositives, worst));

            if (quality is not null)
            {
                var gt = EvaluationDataset.ReadChecked(item.LabelsPath!);
                var t = truth.AsSpan(0, n);
                for (int i = 0; i < n; i++) t[i] = gt[i];
                quality.Add(t, classIndex, m);
            }
        });
        SegmentationSummary? segmentation = null;
        if (quality is not null)
        {
            var q = quality.Compute();
            var names = bundle.ClassNames;
            segmentation = new SegmentationSummary(q.ClosedSetMeanIoU, q.OpenSetMeanIoU, q.FlaggedPixels, q.FlaggedCorrect,
                q.Classes.Select(c => new NamedClassIoU(c.ClassId, names[c.ClassId], c.ClosedSet, c.OpenSet)).ToList());
        }
        return new SecondPassResult(regionMetrics.Compute(), segmentation, rows,
            positives == 0 ? 0 : (double)tp / positives, negatives == 0 ? 0 : (double)fp / negatives, flaggedTotal);
    }

    /// <summary>Saves a new profile version: the primary method's options with the recommended threshold, the rest kept.</summary>
    private static string WriteProfile(ModelBundle bundle, EvaluatedMethod primary, ScoringOptions current, float threshold,
        EvaluationDataset dataset, EvaluationSettings settings)
    {
        var now = settings.Now ?? DateTimeOffset.UtcNow;
        string version = ScoringProfile.VersionAt(now);
        // Two saves within one second must still give two versions.
        while (version == bundle.Profile.Version) { now = now.AddSeconds(1); version = ScoringProfile.VersionAt(now); }
        string target = settings.TargetFpr is double f
            ? $"FPR {f.ToString(System.Globalization.CultureInfo.InvariantCulture)}"
            : $"TPR {settings.TargetTpr.ToString(System.Globalization.CultureInfo.InvariantCulture)}";
        var profile = new ScoringProfile
        {
            Version = version,
            Options = EvaluatedMethods.OptionsFor(primary, current) with { Threshold = threshold },
            CreatedUtc = now,
            Note = $"threshold from evaluation of {dataset.Name} at {target}",
        };
        profile.Save(bundle.Folder);
        return version;
    }
}
