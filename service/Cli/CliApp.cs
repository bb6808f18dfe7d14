using System.CommandLine;
using Strayspot.Scoring.Logits;

namespace Strayspot.Service.Cli;

/// <summary>The command line: one verb a file, registered here.</summary>
public static class CliApp
{
    public const int ExitOk = 0;
    public const int ExitFailure = 1;
    public const int ExitBadInput = 2;

    public static RootCommand Build()
    {
        var root = new RootCommand(
            "strayspot: finds what a segmentation model was never trained on. " +
            "A data-triage and monitoring aid, not a certified safety function.");
        root.Subcommands.Add(DemoVerb.Create());
        root.Subcommands.Add(ScoreVerb.Create());
        root.Subcommands.Add(ScoreLogitsVerb.Create());
        root.Subcommands.Add(CalibrateVerb.Create(() => new Calibration.PixelReductionMaxLogitReducer()));
        root.Subcommands.Add(InspectVerb.Create());
        root.Subcommands.Add(EvaluateVerb.Create());
        root.Subcommands.Add(ServeVerb.Create());
        root.Subcommands.Add(HealthcheckVerb.Create());
        root.Subcommands.Add(ManifestVerb.Create());
        return root;
    }

    public static int Run(string[] args)
    {
        var parsed = Build().Parse(args);
        // Usage errors are bad input too: exit 2, like every other refusal.
        if (parsed.Errors.Count > 0 && parsed.Action is not System.CommandLine.Help.HelpAction)
        {
            foreach (var error in parsed.Errors) Console.Error.WriteLine($"error [usage]: {error.Message}");
            return ExitBadInput;
        }
        return parsed.Invoke();
    }

    /// <summary>Runs a verb body, turning refused input into a message and exit code 2 instead of a stack trace.</summary>
    public static int Guard(Func<int> body)
    {
        try
        {
            return body();
        }
        catch (Strayspot.Scoring.CodedException e)
        {
            Console.Error.WriteLine($"error [{e.Code}]: {e.Message}");
            return ExitBadInput;
        }
        catch (Exception e) when (e is FileNotFoundException or DirectoryNotFoundException or UnauthorizedAccessException)
        {
            Console.Error.WriteLine($"error [file]: {e.Message}");
            return ExitBadInput;
        }
    }
}
