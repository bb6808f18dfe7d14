using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Http;
using Microsoft.AspNetCore.TestHost;
using Serilog.Events;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Hosting;
using Strayspot.Service.Models;
using Strayspot.Tests.Service.Api;

namespace Strayspot.Tests.Service.Hosting;

public class ExceptionMappingTests
{
    [Fact]
    public async Task Thrown_exceptions_become_problems_with_stable_codes_and_unknown_ones_a_logged_500()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
        var log = new LogCapture();
        await using var app = TestService.BuildOnly(root, log: log);
        app.MapGet("/test/scoring", () => { throw new ScoringInputException(ScoringErrorCodes.FrameSize, "Frame size must be positive; got 0×4."); });
        app.MapGet("/test/model", () => { throw new Strayspot.Service.Frames.FrameException(Strayspot.Service.Frames.FrameErrorCodes.TooLarge, "The frame has 90000000 pixels."); });
        app.MapGet("/test/path", () => { throw new UnsafePathException("The path '../x' contains '..'."); });
        app.MapGet("/test/bug", () => { throw new InvalidOperationException("internal detail 7f3a"); });
        await app.StartAsync();
        using var client = app.GetTestClient();

        var p = await TestService.ProblemAsync(await client.GetAsync("/test/scoring"), 400, "frame-size");
        Assert.Contains("0×4", p.GetProperty("detail").GetString());
        await TestService.ProblemAsync(await client.GetAsync("/test/model"), 413, "frame-too-large");
        await TestService.ProblemAsync(await client.GetAsync("/test/path"), 400, "path-outside-data");

        var bug = await TestService.ProblemAsync(await client.GetAsync("/test/bug"), 500, "internal-error");
        Assert.DoesNotContain("7f3a", bug.ToString()); // internals stay in the log, not in the answer
        Assert.Contains(log.Events, e => e.Level == LogEventLevel.Error && e.Exception?.Message == "internal detail 7f3a");
        await app.StopAsync();
    }
}
