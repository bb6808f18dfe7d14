using System.Text.Json;
using Strayspot.Service.Cli;
using Strayspot.Service.Demo;
using Strayspot.Service.Models;
using Strayspot.Service.Recordings;
using Strayspot.Tests.Service.Demo;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Recordings;

/// <summary>The <c>score</c> verb on a video file and on an image sequence, and image-sequence ordering.</summary>
public sealed class ScoreRecordingVerbTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-scorerec-").FullName;

    public void Dispose() => Directory.Delete(_dir, recursive: true);

    private static (int Exit, string Out, string Err) Run(params string[] args)
    {
        var (oldOut, oldErr) = (Console.Out, Console.Error);
        var (o, e) = (new StringWriter(), new StringWriter());
        Console.SetOut(o);
        Console.SetError(e);
        try { return (CliApp.Run(args), o.ToString(), e.ToString()); }
        finally { Console.SetOut(oldOut); Console.SetError(oldErr); }
    }

    private static List<JsonElement> Lines(string path) => File.ReadLines(path).Select(l => JsonDocument.Parse(l).RootElement).ToList();

    private ApronDriveBy Drive => new(frameWidth: 256, frameHeight: 128, panoramaWidth: 384, step: 16, debris: 3);

    [VideoFact]
    public void Score_takes_a_video_file_and_writes_its_recording_outputs()
    {
        var drive = Drive;
        string mp4 = Path.Combine(_dir, "pass.mp4");
        VideoFiles.EncodeMp4(mp4, 256, 128, drive.FrameRate, Enumerable.Range(0, drive.FrameCount).Select(drive.Rgb));
        string outDir = Path.Combine(_dir, "out");
        var (exit, stdout, stderr) = Run("score", DemoFixture.CommittedFolder, mp4, "--out", outDir, "--every", "2", "--min-frames", "2", "--threads", "1");
        Assert.True(exit == CliApp.ExitOk, stderr);
        Assert.Contains("recording pass:", stdout);
        string folder = Path.Combine(outDir, "pass");
        var lines = Lines(Path.Combine(folder, RecordingRun.FramesFile));
        Assert.Equal([0L, 2, 4, 6, 8], lines.Select(l => l.GetProperty("index").GetInt64()));
        Assert.Equal([0.0, 0.2, 0.4, 0.6, 0.8], lines.Select(l => Math.Round(l.GetProperty("timeSeconds").GetDouble(), 3)));
        var report = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(folder, RecordingRun.TracksFile))).RootElement;
        Assert.Equal(2, report.GetProperty("minimumFramesSeen").GetInt32());
        foreach (var t in report.GetProperty("tracks").EnumerateArray())
        {
            Assert.Equal(t.GetProperty("framesSeen").GetInt32() >= 2, t.GetProperty("kept").GetBoolean());
            Assert.True(File.Exists(Path.Combine(folder, t.GetProperty("bestOverlay").GetString()!)));
        }
        Assert.True(File.Exists(Path.Combine(folder, RecordingRun.PlotFile)));
        // Each frame line's regions name their track; ranking.json ranks the recording's time segments.
        var sightings = report.GetProperty("tracks").EnumerateArray().SelectMany(t => t.GetProperty("sightings").EnumerateArray()
            .Select(g => (g.GetProperty("index").GetInt64(), g.GetProperty("region").GetInt32(), t.GetProperty("id").GetInt32()))).ToHashSet();
        Assert.Equal(sightings, lines.SelectMany(l => l.GetProperty("regions").EnumerateArray()
            .Select(r => (l.GetProperty("index").GetInt64(), r.GetProperty("id").GetInt32(), r.GetProperty("track").GetInt32()))).ToHashSet());
        var segments = report.GetProperty("segments").EnumerateArray().ToList();
        Assert.NotEmpty(segments);
        var ranking = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(outDir, ScoreVerb.RankingFile))).RootElement.EnumerateArray().ToList();
        Assert.Equal(segments.Select(g => g.GetProperty("rank").GetInt32()), ranking.Select(r => r.GetProperty("segment").GetInt32()));
        Assert.All(ranking, r => Assert.Equal(Path.Combine("pass", RecordingRun.TracksFile), r.GetProperty("report").GetString()));
        Assert.Equal(segments.Select(g => g.GetProperty("startSeconds").GetDouble()), ranking.Select(r => r.GetProperty("startSeconds").GetDouble()));
    }

    [Fact]
    public void An_image_sequence_is_a_recording_in_frame_number_order()
    {
        var drive = Drive;
        string seq = Path.Combine(_dir, "cam");
        Directory.CreateDirectory(seq);
        // Names sort differently as text (f10 before f9): the number decides.
        int[] numbers = [8, 9, 10, 11];
        for (int i = 0; i < numbers.Length; i++)
            DemoPng.SaveRgb(Path.Combine(seq, $"f{numbers[i]}.png"), drive.Rgb(i), 256, 128);
        string outDir = Path.Combine(_dir, "out");
        var (exit, stdout, stderr) = Run("score", DemoFixture.CommittedFolder, seq, "--sequence", "--sequence-rate", "5", "--out", outDir, "--threads", "1");
        Assert.True(exit == CliApp.ExitOk, stderr);
        var lines = Lines(Path.Combine(outDir, "cam", RecordingRun.FramesFile));
        Assert.Equal(["cam@000000", "cam@000001", "cam@000002", "cam@000003"], lines.Select(l => l.GetProperty("frameId").GetString()));
        Assert.Equal([0.0, 0.2, 0.4, 0.6], lines.Select(l => Math.Round(l.GetProperty("timeSeconds").GetDouble(), 3)));
        var sequence = new ImageSequenceRecording(seq);
        var firstPixel = sequence.Frames().Select(f => { using (f) return f.Frame.Image[0, 0]; }).ToList();
        Assert.Equal(Enumerable.Range(0, 4).Select(i => drive.Rgb(i)).Select(b => (b[0], b[1], b[2])), firstPixel.Select(p => (p.R, p.G, p.B)));
    }

    [Fact]
    public void An_image_sequence_refuses_unnumbered_and_repeated_frame_numbers()
    {
        string seq = Path.Combine(_dir, "bad");
        Directory.CreateDirectory(seq);
        var rgb = Drive.Rgb(0);
        DemoPng.SaveRgb(Path.Combine(seq, "a_01.png"), rgb, 256, 128);
        DemoPng.SaveRgb(Path.Combine(seq, "b_1.png"), rgb, 256, 128);
        var e = Assert.Throws<ModelException>(() => new ImageSequenceRecording(seq));
        Assert.Equal(RecordingErrorCodes.RecordingFormat, e.Code);
        Assert.Contains("same frame number 1", e.Message);
        File.Delete(Path.Combine(seq, "b_1.png"));
        DemoPng.SaveRgb(Path.Combine(seq, "cover.png"), rgb, 256, 128);
        Assert.Contains("carries no frame number", Assert.Throws<ModelException>(() => new ImageSequenceRecording(seq)).Message);
    }

    [Fact]
    public void Score_on_a_file_that_is_not_a_video_exits_with_the_code()
    {
        string fake = Path.Combine(_dir, "notes.mp4");
        File.WriteAllText(fake, "not a video at all");
        var (exit, _, stderr) = Run("score", DemoFixture.CommittedFolder, fake, "--out", Path.Combine(_dir, "out"));
        Assert.Equal(2, exit);
        Assert.Contains(VideoFiles.SkipReason is null ? "error [recording-format]" : "error [video-decoder-missing]", stderr);
    }
}
