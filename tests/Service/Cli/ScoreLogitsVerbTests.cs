using System.Text.Json;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Cli;

namespace Strayspot.Tests.Service.Cli;

public sealed class ScoreLogitsVerbTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-cli-").FullName;

    public void Dispose() => Directory.Delete(_dir, recursive: true);

    private string WriteLogits(int c, int h, int w, Func<int, int, int, float> value)
    {
        var data = new float[c * h * w];
        for (int k = 0; k < c; k++)
            for (int y = 0; y < h; y++)
                for (int x = 0; x < w; x++) data[(k * h + y) * w + x] = value(k, y, x);
        string path = Path.Combine(_dir, "frame.npy");
        using var f = File.Create(path);
        Npy.WriteFloat32(f, data, [1, c, h, w]);
        return path;
    }

    [Fact]
    public void Writes_report_artifacts_and_a_score_map_of_the_frame_size()
    {
        string logits = WriteLogits(3, 16, 32, (k, y, x) => k == (x < 16 ? 0 : 1) ? (x is >= 20 and < 26 && y is >= 4 and < 10 ? 3f : 9f) : 0f);
        string stats = Path.Combine(_dir, "stats.json");
        new ClassStatistics([new("a", 500, 9, 1), new("b", 500, 9, 1), new("c", 500, 9, 1)]).Save(stats);
        string output = Path.Combine(_dir, "out");

        int exit = CliApp.Run(["score-logits", logits, "--statistics", stats, "--frame-size", "64x32", "--out", output,
            "--threshold", "2", "--min-area", "4"]);

        Assert.Equal(CliApp.ExitOk, exit);
        foreach (string f in new[] { "report.json", "classes.png", "mask.png", "heat.png", "score.npy" })
            Assert.True(File.Exists(Path.Combine(output, f)), f);
        var score = Npy.ReadFloat32(Path.Combine(output, "score.npy"));
        Assert.Equal(new[] { 32, 64 }, score.Shape);
        using var report = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(output, "report.json")));
        Assert.Equal(64, report.RootElement.GetProperty("frame").GetProperty("width").GetInt32());
        Assert.Equal("sml", report.RootElement.GetProperty("method").GetString());
        Assert.True(report.RootElement.GetProperty("regions").GetArrayLength() >= 1);
        Assert.Empty(Directory.GetFiles(output, "*.tmp", SearchOption.AllDirectories));
    }

    [Fact]
    public void Truncated_npy_exits_with_code_2_and_writes_no_report()
    {
        string logits = WriteLogits(2, 4, 4, (_, _, _) => 1f);
        var bytes = File.ReadAllBytes(logits);
        File.WriteAllBytes(logits, bytes[..(bytes.Length - 10)]);
        string output = Path.Combine(_dir, "out");
        var err = new StringWriter();
        var old = Console.Error;
        Console.SetError(err);
        try
        {
            Assert.Equal(CliApp.ExitBadInput, CliApp.Run(["score-logits", logits, "--method", "maxlogit", "--out", output]));
        }
        finally { Console.SetError(old); }
        Assert.Contains("npy-format", err.ToString());
        Assert.False(File.Exists(Path.Combine(output, "report.json")));
    }

    [Theory]
    [InlineData("--frame-size", "0x10")]
    [InlineData("--method", "softmax")]
    [InlineData("--kernel", "4")]
    public void Bad_option_values_exit_with_code_2(string option, string value)
    {
        string logits = WriteLogits(2, 4, 4, (_, _, _) => 1f);
        var old = Console.Error;
        Console.SetError(new StringWriter());
        try
        {
            Assert.Equal(CliApp.ExitBadInput, CliApp.Run(["score-logits", logits, "--method", "maxlogit", "--out", Path.Combine(_dir, "o"), option, value]));
        }
        finally { Console.SetError(old); }
    }

    [Fact]
    public void Missing_logits_file_exits_with_code_2()
    {
        var old = Console.Error;
        Console.SetError(new StringWriter());
        try
        {
            Assert.Equal(CliApp.ExitBadInput, CliApp.Run(["score-logits", Path.Combine(_dir, "none.npy"), "--method", "maxlogit", "--out", _dir]));
        }
        finally { Console.SetError(old); }
    }
}
