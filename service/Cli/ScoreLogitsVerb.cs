using System.CommandLine;
using System.Text.Json;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Reports;
using Strayspot.Service.Rendering;

namespace Strayspot.Service.Cli;

/// <summary>
/// Scores logits computed elsewhere (an NPY file) and writes the frame report, class map, mask, heat map and
/// the final score map as NPY, so every number can be checked in the user's own tools.
/// </summary>
public static class ScoreLogitsVerb
{
    public static Command Create()
    {
        var logits = new Argument<FileInfo>("logits") { Description = "float32 NPY, shape [C,h,w] or [1,C,h,w]" };
        var statistics = new Option<FileInfo?>("--statistics") { Description = "class statistics or calibration JSON (needed by sml)" };
        var frameSize = new Option<string?>("--frame-size") { Description = "WIDTHxHEIGHT of the frame the logits belong to (default: the logits' own size)" };
        var output = new Option<DirectoryInfo>("--out") { Description = "folder for the report and artifacts", Required = true };
        var stretch = new Option<bool>("--stretch") { Description = "accept logits whose aspect ratio differs from the frame's (they are stretched onto it)" };
        var scoring = new ScoringOptionsBinding();
        var command = new Command("score-logits", "Score an NPY logits file and write the report and artifacts.");
        command.Arguments.Add(logits);
        command.Options.Add(statistics);
        command.Options.Add(frameSize);
        command.Options.Add(output);
        command.Options.Add(stretch);
        scoring.AddTo(command);
        command.SetAction(p => CliApp.Guard(() =>
        {
            var options = scoring.Apply(p, new ScoringOptions());
            var stats = p.GetValue(statistics) is { } sf ? ClassStatistics.Load(sf.FullName) : null;
            var result = Run(p.GetValue(logits)!.FullName, stats, p.GetValue(frameSize), options, p.GetValue(output)!.FullName, p.GetValue(stretch));
            Console.WriteLine($"frame score {result.FrameScore:0.###}, {result.Regions.Count} region(s), {result.AnomalousShare:P2} flagged");
            Console.WriteLine($"wrote {Path.Combine(p.GetValue(output)!.FullName, "report.json")}");
            return CliApp.ExitOk;
        }));
        return command;
    }

    public static FrameReport Run(string logitsPath, ClassStatistics? statistics, string? frameSize, ScoringOptions options, string outputFolder,
        bool stretch = false)
    {
        var npy = Npy.ReadFloat32(logitsPath);
        var shape = new long[npy.Shape.Length];
        for (int i = 0; i < shape.Length; i++) shape[i] = npy.Shape[i];
        var view = LogitsView.FromShape(npy.Data, shape);
        var (width, height) = frameSize is null ? (view.Width, view.Height) : ScoringOptionsBinding.ParseSize(frameSize);
        if (!stretch) LogitsAspect.EnsureAgrees(view.Height, view.Width, height, width, "--frame-size is WIDTHxHEIGHT", "--stretch");

        var pipeline = new FramePipeline(options, statistics);
        var scored = pipeline.Score(view, height, width);

        Directory.CreateDirectory(outputFolder);
        var names = statistics?.Classes.Select(c => c.Name).ToList();
        var artifacts = ArtifactWriter.Write(scored, ArtifactWriter.All, ColorScales.ClassColors(scored.ClassCount), frame: null, outputFolder);
        var report = FrameReport.From(scored, options, names, Path.GetFileNameWithoutExtension(logitsPath),
            logits: new LogitsReport(view.Channels, view.Height, view.Width)) with
        {
            Artifacts = artifacts,
            // No model folder here: the calibration's binding and frame size are unknown, the method's score range is not.
            Warnings = ScoringWarnings.For(width, height, options, view.Channels, null, null),
        };
        AtomicFile.WriteAllBytes(Path.Combine(outputFolder, "report.json"), JsonSerializer.SerializeToUtf8Bytes(report, FrameReport.JsonOptions));
        return report;
    }
}
