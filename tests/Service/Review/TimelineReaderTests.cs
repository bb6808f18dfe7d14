using System.Text;
using System.Text.Json;
using Strayspot.Service.Cli;
using Strayspot.Service.Demo;
using Strayspot.Service.Recordings;
using Strayspot.Service.Review;
using Strayspot.Tests.Service.Demo;

namespace Strayspot.Tests.Service.Review;

/// <summary>
/// The timeline strip's light reader of frames.jsonl (time and frame score only) against a full parse of every line,
/// on real recording output and on lines a writer could shape differently.
/// </summary>
public sealed class TimelineReaderTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-timeline-").FullName;

    public void Dispose() => Directory.Delete(_dir, recursive: true);

    /// <summary>What the strip read before the light reader: each line parsed whole into a document.</summary>
    private static (List<double> Times, List<float?> Scores) FullParse(string path)
    {
        var times = new List<double>();
        var scores = new List<float?>();
        foreach (string line in File.ReadLines(path))
        {
            if (line.Length == 0) continue;
            using var doc = JsonDocument.Parse(line);
            var root = doc.RootElement;
            times.Add(root.GetProperty("timeSeconds").GetDouble());
            float? s = root.TryGetProperty("frameScore", out var f) && f.ValueKind == JsonValueKind.Number ? f.GetSingle() : null;
            scores.Add(s is float v && float.IsFinite(v) ? v : null);
        }
        return (times, scores);
    }

    [Fact]
    public void Real_recording_output_gives_the_same_points_as_a_full_parse()
    {
        var drive = new ApronDriveBy(frameWidth: 256, frameHeight: 128, panoramaWidth: 384, step: 16, debris: 3);
        string seq = Path.Combine(_dir, "cam");
        Directory.CreateDirectory(seq);
        for (int i = 0; i < 6; i++) DemoPng.SaveRgb(Path.Combine(seq, $"f{i:D2}.png"), drive.Rgb(i), 256, 128);
        string outDir = Path.Combine(_dir, "out");
        var (oldOut, oldErr) = (Console.Out, Console.Error);
        Console.SetOut(TextWriter.Null);
        Console.SetError(TextWriter.Null);
        int exit;
        try { exit = CliApp.Run(["score", DemoFixture.CommittedFolder, seq, "--sequence", "--sequence-rate", "5", "--out", outDir, "--threads", "1"]); }
        finally { Console.SetOut(oldOut); Console.SetError(oldErr); }
        Assert.Equal(CliApp.ExitOk, exit);
        string path = Path.Combine(outDir, "cam", RecordingRun.FramesFile);
        Assert.Contains("\"outline\":[[", File.ReadAllText(path)); // the bulk the reader steps over is there

        var (times, scores) = FullParse(path);
        var light = BatchReview.Timeline(path);
        Assert.Equal(6, times.Count);
        Assert.Equal(times, light.Times);
        Assert.Equal(scores, light.Scores);
        Assert.False(light.Merged);
    }

    [Fact]
    public void Odd_field_orders_escapes_and_line_ends_read_as_a_full_parse_reads_them()
    {
        string[] lines =
        [
            // Regions first, the time last, names inside the regions that match the wanted ones.
            """{"regions":[{"id":1,"timeSeconds":99,"frameScore":99,"outline":[[1,2],[3,4]]}],"frameScore":2.5,"timeSeconds":0.1}""",
            // Escaped names and strings holding braces and quotes.
            """{"frameId":"a\"}{\\","time\u0053econds":0.2,"frame\u0053core":3.25e0,"note":"\n{\"frameScore\":7}"}""",
            // No score, a null score, a score as text, a non-finite score.
            """{"timeSeconds":0.3}""",
            """{"timeSeconds":0.4,"frameScore":null}""",
            """{"timeSeconds":0.5,"frameScore":"4"}""",
            """{"timeSeconds":0.6,"frameScore":1e39}""",
            // A repeated name: a parsed document keeps the last.
            """{"timeSeconds":0.7,"frameScore":1,"frameScore":5.5,"timeSeconds":0.75}""",
            // Whitespace around tokens, deep nesting to step over, and a very long line.
            """  { "timeSeconds" : 0.8 , "x" : [[[[{"a":[1,{"b":[]}]}]]]] , "frameScore" : -1.5 }  """,
            "{\"timeSeconds\":0.9,\"frameScore\":6,\"regions\":[" + string.Join(",", Enumerable.Range(0, 4000).Select(i => $"{{\"id\":{i},\"outline\":[[{i},{i}]]}}")) + "]}",
        ];
        string path = Path.Combine(_dir, "odd.jsonl");
        // CRLF line ends, a blank line, a byte order mark and no newline after the last line.
        File.WriteAllText(path, string.Join("\r\n", lines.Take(4)) + "\r\n\r\n" + string.Join("\n", lines.Skip(4)), new UTF8Encoding(true));

        var (times, scores) = FullParse(path);
        var light = BatchReview.Timeline(path);
        Assert.Equal([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.75, 0.8, 0.9], times);
        Assert.Equal(times, light.Times);
        Assert.Equal(scores, light.Scores);
        Assert.Equal([2.5f, 3.25f, null, null, null, null, 5.5f, -1.5f, 6f], light.Scores);
    }

    [Fact]
    public void Past_the_point_limit_each_point_is_the_highest_of_its_stretch_as_from_a_full_parse()
    {
        string path = Path.Combine(_dir, "long.jsonl");
        var rng = new Random(4);
        using (var w = new StreamWriter(path))
            for (int i = 0; i < 2 * BatchReview.MaxTimelinePoints + 7; i++)
                w.WriteLine(FormattableString.Invariant(
                    $"{{\"frameId\":\"r@{i}\",\"index\":{i},\"timeSeconds\":{i / 10.0},\"frameScore\":{rng.NextDouble() * 4:F4},\"regions\":[]}}"));
        var (times, scores) = FullParse(path);
        var light = BatchReview.Timeline(path);
        Assert.True(light.Merged);
        Assert.Equal((times.Count + 2) / 3, light.Times.Count); // stretches of three frames keep it under the limit
        for (int p = 0; p < light.Times.Count; p++)
        {
            var stretch = Enumerable.Range(p * 3, Math.Min(3, times.Count - p * 3)).ToList();
            int top = stretch.OrderByDescending(i => scores[i]).ThenBy(i => i).First();
            Assert.Equal(times[top], light.Times[p]);
            Assert.Equal(scores[top], light.Scores[p]);
        }
    }

    [Fact]
    public void A_line_without_a_readable_time_or_score_is_left_out_and_a_tail_torn_after_both_keeps_its_point()
    {
        string path = Path.Combine(_dir, "torn.jsonl");
        File.WriteAllText(path, "{\"timeSeconds\":0.1,\"frameScore\":1}\n{\"frameId\":\"x\"}\n{\"timeSeconds\":\"soon\"}\nnot json\n" +
                                "{\"timeSeconds\":0.2,\"frameSc\n{\"timeSeconds\":0.3,\"frameScore\":3}\n{\"timeSeconds\":0.4,\"frameScore\":4,\"regions\":[{\"id\"");
        var light = BatchReview.Timeline(path);
        Assert.Equal([0.1, 0.3, 0.4], light.Times);
        Assert.Equal([1f, 3f, 4f], light.Scores);
    }
}
