using System.Globalization;
using System.Text.Json;
using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Cli;
using Strayspot.Service.Evaluation;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Profiles;

namespace Strayspot.Tests.Service.Evaluation;

public sealed class EvaluatorTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-evaluate-").FullName;

    public void Dispose() => Directory.Delete(_dir, recursive: true);

    private string Model => EvaluationFixtures.CopyDemoModel(Path.Combine(_dir, "model"));

    [Fact]
    public void Small_demo_evaluation_writes_every_file_with_numbers_that_agree_with_single_method_scoring()
    {
        string model = Model;
        string data = EvaluationFixtures.WriteFlatDataset(Path.Combine(_dir, "data"), 3, labels: true);
        string output = Path.Combine(_dir, "out");
        var report = Evaluator.Run(model, data, output, new EvaluationSettings { Exact = true });

        foreach (string f in new[] { "metrics.md", "metrics.csv", "metrics.json", "frames.csv", "roc.png", "precision-recall.png" })
            Assert.True(new FileInfo(Path.Combine(output, f)).Length > 0, f);
        Assert.Empty(Directory.GetFiles(output, "*.tmp"));
        Assert.Equal(7, report.Methods.Count);
        // The ROC comes in two panels side by side: the whole curve and its FPR ≤ 10% end enlarged.
        var roc = SixLabors.ImageSharp.Image.Identify(Path.Combine(output, "roc.png"));
        Assert.Equal((1500, 650), (roc.Width, roc.Height));

        // Recompute every method's pixel metrics through FrameScorer (the `score` path), one method at a time.
        using var bundle = ModelBundle.Load(model);
        var dataset = EvaluationDataset.Open(data);
        var decoder = new FrameDecoder();
        var byHand = EvaluatedMethods.All.ToDictionary(m => m, _ => new ExactPixelMetrics());
        var frameScores = new List<float>();
        long flaggedAtProfileThreshold = 0;
        foreach (var item in dataset.Items)
        {
            using var frame = decoder.DecodeFile(item.FramePath);
            var mask = EvaluationDataset.ReadChecked(item.MaskPath);
            foreach (var m in EvaluatedMethods.All)
            {
                var options = EvaluatedMethods.OptionsFor(m, bundle.Profile.Effective) with { Threshold = report.OperatingPoint.ProfileThreshold };
                bundle.Scorer.Score(frame, (s, _) =>
                {
                    byHand[m].Add(s.AnomalyScore, mask);
                    if (m == EvaluatedMethod.Full) { frameScores.Add(s.FrameScore); flaggedAtProfileThreshold += s.FlaggedPixels; }
                    return 0;
                }, options);
            }
        }
        using var json = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(output, "metrics.json")));
        var methods = json.RootElement.GetProperty("methods").EnumerateArray().ToList();
        var csv = File.ReadAllLines(Path.Combine(output, "metrics.csv")).Skip(1).Select(l => l.Split(',')).ToList();
        for (int i = 0; i < EvaluatedMethods.All.Count; i++)
        {
            var m = EvaluatedMethods.All[i];
            var expected = byHand[m].Compute(0.95, 0.05);
            Assert.Equal(EvaluatedMethods.Name(m), methods[i].GetProperty("method").GetString());
            Assert.Equal(expected.AveragePrecision, methods[i].GetProperty("averagePrecision").GetDouble(), 12);
            Assert.Equal(expected.Auroc, methods[i].GetProperty("auroc").GetDouble(), 12);
            Assert.Equal(expected.FprAtTpr, methods[i].GetProperty("fprAtTpr").GetDouble(), 12);
            Assert.Equal(expected.Auroc, double.Parse(csv[i][1], CultureInfo.InvariantCulture), 12);
            Assert.Equal(expected.AveragePrecision, double.Parse(csv[i][2], CultureInfo.InvariantCulture), 12);
        }
        Assert.True(report.Methods[0].Positives > 0);

        // The operating point: the profile threshold reproduces the TPR target with the pipeline's own mask rule.
        var op = report.OperatingPoint;
        Assert.Equal("sml+boundary+smoothing", op.Method);
        Assert.Equal(flaggedAtProfileThreshold, op.FlaggedPixels);
        Assert.True(op.AchievedTpr >= 0.95, $"TPR {op.AchievedTpr}");
        Assert.Equal(byHand[EvaluatedMethod.Full].Compute(0.95).FprAtTpr, op.AchievedFpr, 12);

        var frames = File.ReadAllLines(Path.Combine(output, "frames.csv"));
        Assert.Equal(1 + 3, frames.Length);
        for (int i = 0; i < 3; i++)
            Assert.Equal(frameScores[i], float.Parse(frames[i + 1].Split(',')[1], CultureInfo.InvariantCulture));
        Assert.NotNull(report.Segmentation);
        Assert.InRange(report.Segmentation!.ClosedSetMeanIoU, 0.01, 1);
        Assert.Contains("| sml+boundary+smoothing |", File.ReadAllText(Path.Combine(output, "metrics.md")));
    }

    [Fact]
    public void Streaming_mode_agrees_with_the_exact_mode_within_its_stated_bounds()
    {
        string model = Model;
        string data = EvaluationFixtures.WriteFlatDataset(Path.Combine(_dir, "data"), 2);
        var exact = Evaluator.Run(model, data, Path.Combine(_dir, "exact"), new EvaluationSettings { Exact = true });
        var streaming = Evaluator.Run(model, data, Path.Combine(_dir, "streaming"), new EvaluationSettings());
        for (int i = 0; i < exact.Methods.Count; i++)
        {
            var b = streaming.Methods[i].Bounds!;
            Assert.InRange(Math.Abs(exact.Methods[i].AveragePrecision - streaming.Methods[i].AveragePrecision), 0, b.AveragePrecision + 1e-12);
            Assert.InRange(Math.Abs(exact.Methods[i].Auroc - streaming.Methods[i].Auroc), 0, b.Auroc + 1e-12);
        }
        Assert.Equal("streaming", streaming.Mode);
    }

    [Fact]
    public void Write_profile_adds_a_new_version_with_the_threshold_and_keeps_the_other_options()
    {
        string model = Model;
        var old = new ScoringProfile
        {
            Version = "v1",
            Options = new ScoringOptions { Method = ScoreMethod.MaxLogit, MinimumRegionArea = 17, Smoothing = new SmoothingOptions { KernelSize = 5, Dilation = 3 } },
        };
        old.Save(model);
        string data = EvaluationFixtures.WriteFlatDataset(Path.Combine(_dir, "data"), 2);
        var now = new DateTimeOffset(2026, 12, 2, 3, 4, 5, TimeSpan.Zero);
        var report = Evaluator.Run(model, data, Path.Combine(_dir, "out"),
            new EvaluationSettings { Exact = true, WriteProfile = true, ForceProfile = true, Now = now }); // the fixture's point flags over 10%

        var saved = ScoringProfile.LoadOrDefault(model);
        Assert.Equal(ScoringProfile.VersionAt(now), saved.Version);
        Assert.Equal(saved.Version, report.ProfileWritten);
        Assert.Equal("v1", report.ProfileVersion);
        Assert.Equal(report.OperatingPoint.ProfileThreshold, saved.Effective.Threshold);
        Assert.Equal("threshold from evaluation of data at TPR 0.95", saved.Note);
        Assert.Equal(now, saved.CreatedUtc);
        // The full method the threshold belongs to, with the old stage parameters and region filter.
        Assert.Equal(ScoreMethod.Sml, saved.Effective.Method);
        Assert.True(saved.Effective.BoundarySuppression.Enabled && saved.Effective.Smoothing.Enabled);
        Assert.Equal(17, saved.Effective.MinimumRegionArea);
        Assert.Equal((5, 3), (saved.Effective.Smoothing.KernelSize, saved.Effective.Smoothing.Dilation));
        Assert.Empty(Directory.GetFiles(model, "*.tmp"));
    }

    [Fact]
    public void Target_fpr_picks_the_threshold_by_false_positive_rate()
    {
        string model = Model;
        string data = EvaluationFixtures.WriteFlatDataset(Path.Combine(_dir, "data"), 2);
        var report = Evaluator.Run(model, data, Path.Combine(_dir, "out"), new EvaluationSettings { Exact = true, TargetFpr = 0.02 });
        Assert.Equal("fpr", report.OperatingPoint.Target);
        Assert.True(report.OperatingPoint.AchievedFpr <= 0.02, $"FPR {report.OperatingPoint.AchievedFpr}");
        Assert.Equal(report.Methods[^1].TprAtFpr!.Value, report.OperatingPoint.AchievedTpr, 12);
    }

    [Fact]
    public void Strict_threshold_flags_exactly_the_scores_at_or_above_the_metric_threshold()
    {
        foreach (double m in new[] { 0.3472635, -2.5, 1e-30, 3.0000001192092896 })
        {
            float t = Evaluator.StrictThreshold(m);
            float atOrAbove = (float)m < m ? MathF.BitIncrement((float)m) : (float)m;
            Assert.True(atOrAbove > t);
            Assert.False(MathF.BitDecrement(atOrAbove) > t);
        }
    }

    private static (int Exit, string Error) Cli(params string[] args)
    {
        var err = new StringWriter();
        var old = Console.Error;
        Console.SetError(err);
        try { return (CliApp.Run(args), err.ToString()); }
        finally { Console.SetError(old); }
    }

    [Fact]
    public void The_console_table_names_the_tpr_its_fpr_column_is_taken_at()
    {
        string model = Model;
        string data = EvaluationFixtures.WriteFlatDataset(Path.Combine(_dir, "data"), 1);
        var printed = new StringWriter();
        var old = Console.Out;
        Console.SetOut(printed);
        int exit;
        try { exit = CliApp.Run(["evaluate", model, data, "--out", Path.Combine(_dir, "out"), "--target-tpr", "0.9"]); }
        finally { Console.SetOut(old); }
        Assert.Equal(CliApp.ExitOk, exit);
        Assert.Contains("FPR at 90% TPR", printed.ToString());
        Assert.DoesNotContain("FPR@TPR", printed.ToString());
    }

    [Fact]
    public void Bad_input_exits_with_code_2_and_a_clear_message()
    {
        string model = Model;
        string output = Path.Combine(_dir, "out");
        var missing = Cli("evaluate", model, Path.Combine(_dir, "nowhere"), "--out", output);
        Assert.Equal(CliApp.ExitBadInput, missing.Exit);
        Assert.Contains("dataset-missing", missing.Error);

        string empty = Directory.CreateDirectory(Path.Combine(_dir, "empty")).FullName;
        var none = Cli("evaluate", model, empty, "--out", output);
        Assert.Equal(CliApp.ExitBadInput, none.Exit);
        Assert.Contains("holds no frames with masks", none.Error);

        string data = EvaluationFixtures.WriteFlatDataset(Path.Combine(_dir, "data"), 1);
        var mask = Strayspot.Service.Demo.DemoPng.LoadGray(Path.Combine(data, "mask_000.png"));
        mask.Values[10] = 7;
        Strayspot.Service.Demo.DemoPng.SaveGray(Path.Combine(data, "mask_000.png"), mask.Values, mask.Width, mask.Height);
        var seven = Cli("evaluate", model, data, "--out", output);
        Assert.Equal(CliApp.ExitBadInput, seven.Exit);
        Assert.Contains("mask_000.png: value 7 at x=10, y=0", seven.Error);

        var both = Cli("evaluate", model, data, "--out", output, "--target-tpr", "0.9", "--target-fpr", "0.1");
        Assert.Equal(CliApp.ExitBadInput, both.Exit);
        Assert.Contains("not both", both.Error);
        var range = Cli("evaluate", model, data, "--out", output, "--target-tpr", "1.5");
        Assert.Equal(CliApp.ExitBadInput, range.Exit);
        Assert.Contains("--target-tpr must be in (0, 1]", range.Error);
        var noModel = Cli("evaluate", Path.Combine(_dir, "no-model"), data, "--out", output);
        Assert.Equal(CliApp.ExitBadInput, noModel.Exit);
        Assert.False(File.Exists(Path.Combine(output, "metrics.json")));
    }
}
