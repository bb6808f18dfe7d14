using Strayspot.Tests.Service.Setup;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Cli;

/// <summary>
/// Numeric options out of range are refused with <c>error [options-invalid]</c> and exit 2, before any model loads:
/// never an unhandled exception (exit 1 with a stack trace) and never ten thousand threads.
/// </summary>
[Collection(ConsoleCollection.Name)]
public sealed class CliOptionRangeTests
{
    [Theory]
    [InlineData("score", "--every", "0")]
    [InlineData("score", "--per-second", "-1")]
    [InlineData("score", "--per-second", "NaN")]
    [InlineData("score", "--sequence-rate", "0")]
    [InlineData("score", "--min-frames", "0")]
    [InlineData("score", "--missed-frames", "-1")]
    [InlineData("score", "--threads", "-1")]
    [InlineData("score", "--threads", "100000")]
    [InlineData("check-input", "--threads", "-1")]
    [InlineData("check-input", "--threads", "100000")]
    [InlineData("evaluate", "--threads", "-2")]
    public void An_option_out_of_range_is_refused_with_exit_2_naming_it(string verb, string option, string value)
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 2 }, frames: 1);
        string[] args = verb switch
        {
            "score" => ["score", s.Model, s.Frames, "--out", s.Dir["out"], "--method", "msp", "--threshold", "-0.5", option, value],
            "check-input" => ["check-input", s.Model, s.Frames, option, value],
            _ => ["evaluate", s.Model, s.Frames, "--out", s.Dir["out"], option, value],
        };
        var (exit, _, err) = CliRun.Capture(args);
        Assert.True(exit == 2, $"exit {exit}: {err}");
        Assert.Contains("error [options-invalid]", err);
        Assert.Contains(option, err);
    }
}
