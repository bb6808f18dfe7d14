using Strayspot.Scoring.Regions;
using Strayspot.Scoring.Tracks;
using Strayspot.Service.Demo;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Service.Recordings;

namespace Strayspot.Bench;

/// <summary>
/// Track-level results on the demo drive-by (512×512, 65 frames at 10 frames/s, H.264 at CRF 12, every second frame
/// scored on the demo model): the frames are scored once, then the regions are linked again under each linking tolerance and persistence
/// rule, so the table compares the tracking settings on the same regions.
/// </summary>
public static class DriveByBench
{
    private sealed record Scored(int Sample, long Index, double Time, int Width, int Height, List<Region> Regions);

    public static void Run()
    {
        string dir = Directory.CreateTempSubdirectory("strayspot-bench-driveby-").FullName;
        try
        {
            using var local = LocalModel.Open(Path.Combine(EvaluationBench.RepositoryRoot(), "models", "demo"));
            var drive = new ApronDriveBy();
            string mp4 = Path.Combine(dir, "drive.mp4");
            RecordingBench.Encode(dir, drive, "drive.mp4", crf: 12); // as the drive-by test encodes it
            var sampling = RecordingSampling.Every(2);
            var frames = new List<Scored>();
            foreach (var rf in VideoRecording.Open(mp4, new RecordingOptions { Sampling = sampling }).Frames())
                using (rf)
                    frames.Add(local.Runner.Score(local.Lease, rf.Frame, null,
                        (s, _) => new Scored(rf.Sample, rf.Index, rf.TimeSeconds, s.Width, s.Height, [.. s.Regions.Regions])));
            var sampled = frames.Select(f => f.Index).ToList();
            Console.WriteLine();
            Console.WriteLine($"## Drive-by tracks: {drive.FrameCount} frames {drive.FrameWidth}×{drive.FrameHeight}, {frames.Count} scored " +
                              $"({frames.Sum(f => f.Regions.Count)} regions), demo model, {drive.Objects.Count} debris objects painted");
            Console.WriteLine();
            Console.WriteLine("| linking (overlap ≥, centroid within, missed frames) | seen in ≥ k frames | tracks kept | in view | found | missed | false |");
            Console.WriteLine("|---|---|---|---|---|---|---|");
            TrackLinkOptions[] linkings =
            [
                new(),
                new() { MissedFrames = 0 },
                new() { MissedFrames = 2 },
                new() { MaximumCentroidShift = 0.02 },
                new() { MaximumCentroidShift = 0.10 },
                new() { MinimumOverlap = 0.3 },
            ];
            foreach (var linking in linkings)
            {
                var linker = new TrackLinker(linking);
                foreach (var f in frames) linker.Add(f.Sample, f.Index, f.Time, f.Width, f.Height, f.Regions);
                var tracks = linker.Tracks();
                foreach (int k in new[] { 1, 2, 3, 4, 5 })
                {
                    var reports = tracks.Select(t => TrackReport.From(t, t.FramesSeen >= k, "drive", local.Version.ClassNames, null)).ToList();
                    var c = DriveByJudge.Judge(drive, reports, sampled);
                    Console.WriteLine($"| {linking.MinimumOverlap:0.##}, {linking.MaximumCentroidShift:0.##}, {linking.MissedFrames} | {k} | " +
                                      $"{reports.Count(r => r.Kept)} of {reports.Count} | {c.InView} | {c.Found} | {c.Missed} | {c.False} |");
                }
            }
        }
        finally
        {
            Directory.Delete(dir, recursive: true);
        }
    }
}
