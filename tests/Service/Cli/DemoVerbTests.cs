using System.Text.Json;
using Strayspot.Service.Cli;

namespace Strayspot.Tests.Service.Cli;

public sealed class DemoVerbTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-demo-").FullName;

    public void Dispose() => Directory.Delete(_dir, recursive: true);

    [Fact]
    public void Demo_scores_the_bundled_frames_end_to_end_and_ranks_them()
    {
        var old = Console.Out;
        var output = new StringWriter();
        Console.SetOut(output);
        int exit;
        try { exit = CliApp.Run(["demo", "--out", _dir]); }
        finally { Console.SetOut(old); }

        Assert.Equal(CliApp.ExitOk, exit);
        var frames = Directory.GetFiles(Path.Combine(_dir, "frames"), "*.png");
        Assert.NotEmpty(frames);
        foreach (string frame in frames)
        {
            string folder = Path.Combine(_dir, "scores", Path.GetFileNameWithoutExtension(frame));
            foreach (string f in new[] { "report.json", "classes.png", "heat.png", "mask.png", "overlay.png", "score.npy" })
                Assert.True(File.Exists(Path.Combine(folder, f)), $"{folder}/{f}");
        }
        using var ranking = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(_dir, "scores", "ranking.json")));
        var scores = ranking.RootElement.EnumerateArray().Select(e => e.GetProperty("frameScore").GetSingle()).ToList();
        Assert.Equal(frames.Length, scores.Count);
        Assert.Equal(scores.OrderByDescending(s => s), scores);
        Assert.Contains("Results:", output.ToString());

        // Each frame's line counts its regions against the generator's ground truth.
        var lines = output.ToString().Split('\n').Where(l => l.TrimEnd().EndsWith(".png", StringComparison.Ordinal) && l.Contains("  ")).ToList();
        var rows = lines.Select(l => l.Split(' ', StringSplitOptions.RemoveEmptyEntries)).ToList();
        Assert.Equal(frames.Length, rows.Count);
        foreach (var row in rows)
        {
            int regions = int.Parse(row[1]), onDebris = int.Parse(row[2]), falseRegions = int.Parse(row[3]);
            Assert.Equal(regions, onDebris + falseRegions);
            if (row[^1].Contains("_debris", StringComparison.Ordinal))
                Assert.Matches(@"^\d+$", row[4]);
            else
                Assert.Equal(0, onDebris);
        }
        // The demo has to show the method working: both debris frames rank above both ordinary frames.
        var order = rows.Select(r => r[^1].Contains("_debris", StringComparison.Ordinal)).ToList();
        Assert.Equal(order.OrderByDescending(d => d), order);
    }
}
