using System.CommandLine;
using Strayspot.Service.Demo;
using Strayspot.Service.Inference;

namespace Strayspot.Service.Cli;

/// <summary>
/// <c>demo</c>: the whole job on the bundled apron demo, no model of the user's own needed.
/// <c>demo build</c>: regenerates the demo's model, descriptor, calibration and frames from code.
/// </summary>
public static class DemoVerb
{
    public static Command Create()
    {
        var output = new Option<DirectoryInfo>("--out") { Description = "output folder", DefaultValueFactory = _ => new DirectoryInfo("strayspot-demo") };
        var command = new Command("demo", "Score the bundled demo frames (synthetic airport apron with debris) end to end.");
        command.Options.Add(output);
        command.SetAction(p => CliApp.Guard(() =>
        {
            string root = p.GetValue(output)!.FullName;
            var (modelFolder, frames) = BundledDemo.Extract(Path.Combine(root, "model"), Path.Combine(root, "frames"));
            using var local = LocalModel.Open(modelFolder);
            string scores = Path.Combine(root, "scores");
            var truth = GroundTruth(frames);
            var tallies = new Dictionary<string, DemoFrameTally>(StringComparer.Ordinal);
            var ranking = FrameProgress.Run("scoring", frames.Count, Console.Out,
                progress => ScoreVerb.ScoreAll(local, ScoreVerb.ExpandFrames(frames), local.Version.Defaults, scores, progress, inspect: (file, scored) =>
                {
                    if (truth.TryGetValue(file, out var t))
                        tallies[file] = DemoFrameTally.Count(scored.Regions.Labels, scored.Regions.Regions.Count, t.DebrisMask, scored.Width, scored.Height);
                }));
            Console.WriteLine($"Demo model:  {modelFolder}");
            Console.WriteLine($"Frames:      {Path.Combine(root, "frames")}");
            Console.WriteLine($"Results:     {scores}  (per frame: report.json, classes.png, heat.png, mask.png, overlay.png, score.npy)");
            Console.WriteLine("Frames by frame score, highest first, checked against the ground truth the scene generator made:");
            Console.WriteLine("  frame score  regions  on debris  false  debris pieces found  frame");
            foreach (var r in ranking)
            {
                string name = Path.GetFileName(r.Frame);
                if (!tallies.TryGetValue(r.Frame, out var t))
                    Console.WriteLine($"  {r.FrameScore,11:0.000}  {r.RegionCount,7}  {"?",9}  {"?",5}  {"no ground truth",19}  {name}");
                else
                {
                    string pieces = t.Pieces == 0 ? "none painted" : $"{t.PiecesFound} of {t.Pieces}";
                    Console.WriteLine($"  {r.FrameScore,11:0.000}  {t.Regions,7}  {t.OnDebris,9}  {t.False,5}  {pieces,19}  {name}");
                }
            }
            Console.WriteLine("A region is on debris when any of its pixels is debris; every region on a frame without debris is false.");
            return CliApp.ExitOk;
        }));

        var buildOut = new Option<DirectoryInfo>("--out") { Description = "folder for the rebuilt demo", Required = true };
        var build = new Command("build", "Regenerate the demo model folder (model, descriptor, calibration, frames, held-out set) from code.");
        build.Options.Add(buildOut);
        build.SetAction(p => CliApp.Guard(() =>
        {
            var result = DemoAssets.Build(p.GetValue(buildOut)!.FullName);
            foreach (string f in result.Files) Console.WriteLine(f);
            return CliApp.ExitOk;
        }));
        command.Subcommands.Add(build);

        var heldOutOut = new Option<DirectoryInfo>("--out") { Description = "folder for the frames and masks", Required = true };
        var count = new Option<int>("--count") { Description = "how many frames (1..1000)", DefaultValueFactory = _ => 40 };
        var heldOut = new Command("heldout", "Write the demo's held-out debris frames with ground-truth masks, a dataset for `evaluate`.");
        heldOut.Options.Add(heldOutOut);
        heldOut.Options.Add(count);
        heldOut.SetAction(p => CliApp.Guard(() =>
        {
            int n = p.GetValue(count);
            if (n is < 1 or > 1000)
                throw new Strayspot.Scoring.Logits.ScoringInputException(Strayspot.Scoring.Logits.ScoringErrorCodes.Options, $"--count must be 1..1000; got {n}.");
            var files = DemoAssets.WriteHeldOut(p.GetValue(heldOutOut)!.FullName, n);
            Console.WriteLine($"wrote {files.Count / 2} frames with masks to {p.GetValue(heldOutOut)!.FullName}");
            return CliApp.ExitOk;
        }));
        command.Subcommands.Add(heldOut);
        return command;
    }

    /// <summary>
    /// The generator's ground truth for each extracted frame, regenerated from code; a frame whose pixels differ from
    /// the regenerated one (an executable built from other demo files) gets none rather than a wrong one.
    /// </summary>
    private static Dictionary<string, DemoFrame> GroundTruth(IReadOnlyList<string> frames)
    {
        var byName = DemoAssets.DemoFrames().ToDictionary(f => f.FileName, StringComparer.Ordinal);
        var truth = new Dictionary<string, DemoFrame>(StringComparer.Ordinal);
        foreach (string file in frames)
        {
            if (!byName.TryGetValue(Path.GetFileName(file), out var demo)) continue;
            var (rgb, width, height) = DemoPng.LoadRgb(file);
            if (width == demo.Frame.Width && height == demo.Frame.Height && rgb.AsSpan().SequenceEqual(demo.Frame.Rgb)) truth[file] = demo;
        }
        return truth;
    }
}
