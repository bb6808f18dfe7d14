using System.CommandLine;
using System.Globalization;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;

namespace Strayspot.Service.Cli;

/// <summary>
/// <c>strayspot check-input &lt;model-folder&gt; &lt;frames…&gt;</c>: feeds a few of the user's frames to the model with the
/// descriptor as written and with plausible alternatives, and says whether the written preprocessing looks right.
/// </summary>
public static class CheckInputVerb
{
    public const int DefaultFrames = 8;

    public static Command Create()
    {
        var model = new Argument<DirectoryInfo>("model-folder") { Description = "Folder with model.onnx and descriptor.json." };
        var frames = new Argument<string[]>("frames") { Description = "frame files, or folders of .png/.jpg/.jpeg/.webp (ordinary scenes the model knows)", Arity = ArgumentArity.OneOrMore };
        var count = new Option<int>("--frames") { Description = "how many frames to try (spread over the list)", DefaultValueFactory = _ => DefaultFrames };
        var threads = new Option<int?>("--threads") { Description = "ONNX Runtime intra-op threads (default: cores)" };
        var command = new Command("check-input",
            "Compare the model's confidence and class spread with the descriptor's preprocessing and plausible alternatives (a rule of thumb).");
        command.Arguments.Add(model);
        command.Arguments.Add(frames);
        command.Options.Add(count);
        command.Options.Add(threads);
        command.SetAction(p => CliApp.Guard(() =>
        {
            int n = p.GetValue(count);
            if (n < 1) throw new Strayspot.Scoring.Logits.ScoringInputException(Strayspot.Scoring.Logits.ScoringErrorCodes.Options, $"--frames must be at least 1; got {n}.");
            var files = ScoreVerb.ExpandFrames(p.GetValue(frames)!).Select(f => f.Path!).ToList();
            var runtime = new ModelRuntimeOptions { IntraOpThreads = Inference.ParallelSettings.FromThreads(p.GetValue(threads)).IntraOpThreads, WarmUp = false };
            using var segmentation = SegmentationModel.LoadFolder(p.GetValue(model)!.FullName, runtime);
            var decoder = new FrameDecoder();
            var chosen = Spread(files, n);
            var decoded = chosen.Select(decoder.DecodeFile).ToList();
            try
            {
                var result = InputCheck.Run(segmentation, decoded);
                Print(result, segmentation.Descriptor, Console.Out);
                return CliApp.ExitOk;
            }
            finally
            {
                foreach (var d in decoded) d.Dispose();
            }
        }));
        return command;
    }

    /// <summary>Up to <paramref name="n"/> files evenly spread over the list.</summary>
    public static IReadOnlyList<string> Spread(IReadOnlyList<string> files, int n)
    {
        if (files.Count <= n) return files;
        var picked = new List<string>(n);
        for (int i = 0; i < n; i++) picked.Add(files[(int)((long)i * files.Count / n)]);
        return picked;
    }

    public static void Print(InputCheckResult r, ModelDescriptor d, TextWriter w)
    {
        var inv = CultureInfo.InvariantCulture;
        w.WriteLine(string.Create(inv, $"Preprocessing check on {r.Frames} frame(s): how confident the model is, and where its predictions fall."));
        w.WriteLine(string.Create(inv, $"  {"variant",-48} {"mean MSP",9}  top classes (share of pixels)"));
        foreach (var v in r.Variants)
        {
            var top = v.ClassShares.Select((share, c) => (share, c)).OrderByDescending(x => x.share).Take(3)
                .Select(x => string.Create(inv, $"{d.Classes[x.c].Name} {100 * x.share:0.#}%"));
            string used = v.Variant.AsWritten ? "* " : "  ";
            w.WriteLine(string.Create(inv, $"{used}{v.Variant.Name,-48} {v.MeanMaxSoftmax,9:0.000}  {string.Join(", ", top)}"));
        }
        w.WriteLine("  (* = the descriptor as written)");
        if (r.Warnings.Count == 0) w.WriteLine("No warning: the descriptor as written is the most confident variant and uses several classes.");
        foreach (var warning in r.Warnings) w.WriteLine($"warning: {warning}");
        w.WriteLine("This is a rule of thumb, not proof: a model fed the way it was trained is usually the most confident and spreads its " +
                    "predictions over several classes. The model's training code is the authority.");
    }
}
