using System.CommandLine;
using System.Globalization;
using Strayspot.Service.Models;

namespace Strayspot.Service.Cli;

/// <summary><c>strayspot inspect model.onnx [--write-descriptor file]</c>: what an ONNX file takes and gives.</summary>
public static class InspectVerb
{
    public const int BadInput = 2;

    public static Command Create()
    {
        var model = new Argument<FileInfo>("model") { Description = "Path to an .onnx file." };
        var write = new Option<FileInfo?>("--write-descriptor")
        {
            Description = "Also write a starter descriptor.json guessed from the model (check every field before use).",
        };
        var command = new Command("inspect", "Show an ONNX model's inputs, outputs, opset and hash; optionally write a starter descriptor.");
        command.Arguments.Add(model);
        command.Options.Add(write);
        command.SetAction(parseResult =>
        {
            var output = parseResult.InvocationConfiguration.Output;
            var error = parseResult.InvocationConfiguration.Error;
            try
            {
                var facts = ModelInspector.Inspect(parseResult.GetValue(model)!.FullName);
                Print(facts, output);
                if (parseResult.GetValue(write) is FileInfo target)
                {
                    if (target.Exists)
                    {
                        error.WriteLine($"error: {target.FullName} already exists; not overwriting it.");
                        return BadInput;
                    }
                    ModelInspector.StarterDescriptor(facts).Save(target.FullName);
                    output.WriteLine($"Starter descriptor written to {target.FullName}: check the fields marked '?' above, then run 'strayspot check-input'.");
                }
                return 0;
            }
            catch (ModelException e)
            {
                error.WriteLine($"error [{e.Code}]: {e.Message}");
                return BadInput;
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                error.WriteLine($"error: {e.Message}");
                return BadInput;
            }
        });
        return command;
    }

    public static void Print(ModelFacts f, TextWriter w)
    {
        var inv = CultureInfo.InvariantCulture;
        w.WriteLine($"Model     {f.Path}");
        w.WriteLine(string.Create(inv, $"Size      {f.FileBytes} bytes"));
        w.WriteLine($"SHA-256   {f.Sha256}");
        w.WriteLine(string.Create(inv, $"IR        {f.IrVersion}   opset {f.Opset}   producer {(f.Producer.Length > 0 ? f.Producer : "(none)")}"));
        foreach (var t in f.Inputs) w.WriteLine($"Input     {t.Name}  {t.ElementType}  [{string.Join(", ", t.Shape)}]");
        foreach (var t in f.Outputs) w.WriteLine($"Output    {t.Name}  {t.ElementType}  [{string.Join(", ", t.Shape)}]");
        if (f.Opset is > 0 and < 13)
            w.WriteLine(string.Create(inv, $"Note      opset {f.Opset} is older than 13; re-export with opset 13 or newer if loading fails."));
        if (f.Inputs.Count == 0 || f.Outputs.Count == 0) return;
        w.WriteLine();
        w.WriteLine("Descriptor guesses (from the graph; '?' marks what it could not decide: check those against the training):");
        foreach (var g in ModelInspector.Guesses(f))
            w.WriteLine($"  {(g.Decided ? " " : "?")} {g.Field,-20} {g.Value}\n        because {g.Reason}");
    }
}
