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
        root.Subcommands.Add(CheckInputVerb.Create());
        root.Subcommands.Add(EvaluateVerb.Create());
        root.Subcommands.Add(ServeVerb.Create());
        root.Subcommands.Add(WorkVerb.Create());
        root.Subcommands.Add(HealthcheckVerb.Create());
        root.Subcommands.Add(ManifestVerb.Create());
        return root;
    }

    public static int Run(string[] args) => Run(args, null);

    /// <summary>Runs the command line; <paramref name="config"/> redirects the verbs' output (tests).</summary>
    public static int Run(string[] args, InvocationConfiguration? config)
    {
        var parsed = Build().Parse(args);
        var error = config?.Error ?? Console.Error;
        // Usage errors are bad input too: exit 2, like every other refusal.
        if (parsed.Errors.Count > 0 && parsed.Action is not System.CommandLine.Help.HelpAction)
        {
            foreach (var e in parsed.Errors) error.WriteLine($"error [usage]: {e.Message}");
            return ExitBadInput;
        }
        // An unknown option would otherwise be taken for a frame path ("No such frame file: --treshold").
        if (UnknownOptions.Find(parsed) is { } unknown)
        {
            error.WriteLine($"error [usage]: {unknown}");
            return ExitBadInput;
        }
        return config is null ? parsed.Invoke() : parsed.Invoke(config);
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
