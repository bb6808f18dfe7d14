using System.Text.Json;
using Strayspot.Service.Demo;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Service.Recordings;
using Strayspot.Tests.Service.Demo;
using Strayspot.Tests.Support;
using Xunit.Abstractions;

namespace Strayspot.Tests.Service.Recordings;

/// <summary>
/// Our apron drive-by, encoded to MP4 by ffmpeg here, scored end to end through the bundled demo model: tracks found,
/// missed and false, with and without the persistence rule.
/// </summary>
public sealed class DriveByTrackTests(ITestOutputHelper output) : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-driveby-").FullName;

    public void Dispose()
    {
        // For people to look at: the recording and its outputs are kept under $STRAYSPOT_TEST_ARTIFACTS/drive-by when set.
        if (Environment.GetEnvironmentVariable("STRAYSPOT_TEST_ARTIFACTS") is { Length: > 0 } keep)
        {
            string target = Path.Combine(keep, "drive-by");
            if (Directory.Exists(target)) Directory.Delete(target, recursive: true);
            Directory.CreateDirectory(keep);
            Directory.Move(_dir, target);
        }
        else Directory.Delete(_dir, recursive: true);
    }

    [VideoFact]
    public void The_drive_by_yields_a_track_per_debris_object_and_the_persistence_rule_cuts_false_ones()
    {
        var drive = new ApronDriveBy();
        string mp4 = Path.Combine(_dir, "apron-drive-by.mp4");
        VideoFiles.EncodeMp4(mp4, drive.FrameWidth, drive.FrameHeight, drive.FrameRate,
            Enumerable.Range(0, drive.FrameCount).Select(drive.Rgb));
        output.WriteLine($"{drive.FrameCount} frames {drive.FrameWidth}×{drive.FrameHeight}, {new FileInfo(mp4).Length / 1024} KiB, {drive.Objects.Count} debris object(s)");

        using var local = LocalModel.Open(DemoFixture.CommittedFolder, new ParallelSettings { IntraOpThreads = 1, WarmUp = false });
        var video = VideoRecording.Open(mp4, new RecordingOptions { Sampling = RecordingSampling.Every(2) });
        string outFolder = Path.Combine(_dir, "out");
        var report = RecordingRun.Score(local.Runner, local.Lease, video, mp4, RecordingSampling.Every(2), local.Version.Defaults,
            new TrackingSettings { MinimumFramesSeen = 1 }, outFolder);
        var sampled = File.ReadLines(Path.Combine(outFolder, RecordingRun.FramesFile))
            .Select(l => JsonDocument.Parse(l).RootElement.GetProperty("index").GetInt64()).ToList();
        Assert.Equal(Enumerable.Range(0, (drive.FrameCount + 1) / 2).Select(i => 2L * i), sampled);

        // tracks.json holds every track with its sightings (the returned report only the kept ones, in brief).
        var tracks = JsonSerializer.Deserialize<RecordingReport>(File.ReadAllBytes(Path.Combine(outFolder, RecordingRun.TracksFile)),
            Strayspot.Service.Reports.FrameReport.JsonOptions)!.Tracks;
        Assert.Equal(report.TracksFound, tracks.Count);
        Assert.Equal(Enumerable.Range(1, tracks.Count), tracks.Select(t => t.Id));
        var all = DriveByJudge.Judge(drive, tracks, sampled);
        var persistent = DriveByJudge.Judge(drive, tracks.Select(t => t with { Kept = t.FramesSeen >= 3 }).ToList(), sampled);
        output.WriteLine($"all tracks ({report.TracksFound}): {all}");
        output.WriteLine($"seen in ≥ 3 frames ({tracks.Count(t => t.FramesSeen >= 3)}): {persistent}");
        foreach (var t in tracks)
            output.WriteLine($"  track {t.Id}: {t.FirstTime:0.0}–{t.LastTime:0.0} s, {t.FramesSeen} frame(s), max {t.MaxScore:0.00}, on {t.ClassBeneathName}");

        Assert.True(all.InView >= 2, $"the drive-by should bring at least two objects fully into view; {all.InView}");
        Assert.Equal(0, persistent.Missed);                 // the rule keeps every debris object
        Assert.True(persistent.False < all.False, $"the persistence rule should cut false tracks: {persistent.False} vs {all.False}");
        Assert.Equal(all.Found, persistent.Found);
        // Outputs: the plot, one best-frame overlay per track, ranked segments within the recording.
        Assert.True(new FileInfo(Path.Combine(outFolder, RecordingRun.PlotFile)).Length > 1000);
        foreach (var t in tracks) Assert.True(File.Exists(Path.Combine(outFolder, t.BestOverlay!)));
        Assert.NotEmpty(report.Segments);
        Assert.All(report.Segments, s => Assert.InRange(s.StartSeconds, 0, s.EndSeconds));
    }
}
