using System.Diagnostics;
using FFMpegCore;
using FFMpegCore.Pipes;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Demo;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Service.Recordings;

namespace Strayspot.Bench;

/// <summary>
/// Recordings: decoding cost per frame next to scoring cost at 1024×512 and 1920×1080 (our drive-by, H.264 made by
/// ffmpeg here); our frame pipe against FFMpegCore's; frames/s of a whole recording on the demo model; resident
/// memory along a long recording.
/// </summary>
public static class RecordingBench
{
    public static void Run(int runs)
    {
        string dir = Directory.CreateTempSubdirectory("strayspot-bench-rec-").FullName;
        try
        {
            string model = Path.Combine(EvaluationBench.RepositoryRoot(), "models", "demo");
            using var local = LocalModel.Open(model);
            Console.WriteLine();
            Console.WriteLine("## Recordings: decoding next to scoring (demo model, H.264, median ms per frame)");
            Console.WriteLine();
            Console.WriteLine("| frame | decode, our pipe | decode, FFMpegCore pipe | score (model + post-hoc) | decode share of the frame |");
            Console.WriteLine("|---|---|---|---|---|");
            int decodeRuns = Math.Max(3, runs / 3);
            foreach (var (w, h, pano, step) in new[] { (1024, 512, 1536, 16), (1920, 1080, 2560, 32) })
            {
                string mp4 = Encode(dir, new ApronDriveBy(w, h, pano, step), $"drive-{w}x{h}.mp4");
                var ours = new List<double>();
                var core = new List<double>();
                int frames = 0;
                for (int r = 0; r < decodeRuns; r++)
                {
                    var t = Stopwatch.StartNew();
                    frames = 0;
                    foreach (var f in VideoRecording.Open(mp4).Frames()) { f.Dispose(); frames++; }
                    ours.Add(t.Elapsed.TotalMilliseconds / frames);
                    core.Add(FfmpegCoreMsPerFrame(mp4, w, h));
                }
                using var first = VideoRecording.Open(mp4).Frames().First();
                double score = Measure.MedianMs(runs, () => local.Runner.Score(local.Lease, first.Frame, null, (s, _) => s.FrameScore));
                double decode = Measure.Median(ours);
                Console.WriteLine($"| {w}×{h} ({frames} frames) | {decode:0.00} | {Measure.Median(core):0.00} | {score:0.0} | {100 * decode / (decode + score):0.0} % |");
            }

            Console.WriteLine();
            Console.WriteLine("## Recordings: a whole recording through `RecordingRun` (demo model, every frame, tracks and outputs written)");
            Console.WriteLine();
            string drive = Path.Combine(dir, "drive-1024x512.mp4");
            var whole = new List<double>();
            int scored = 0;
            for (int r = 0; r < Math.Max(1, runs / 5); r++)
            {
                var t = Stopwatch.StartNew();
                var report = RecordingRun.Score(local.Runner, local.Lease, VideoRecording.Open(drive), drive, RecordingSampling.EveryFrame, local.Version.Defaults,
                    new TrackingSettings(), Path.Combine(dir, "out"));
                scored = report.FramesScored;
                whole.Add(scored / t.Elapsed.TotalSeconds);
            }
            Console.WriteLine($"| recording | frames | frames/s (median of {whole.Count}) |");
            Console.WriteLine("|---|---|---|");
            Console.WriteLine($"| drive-by 1024×512 | {scored} | {Measure.Median(whole):0.0} |");

            Console.WriteLine();
            Console.WriteLine("## Recordings: resident memory along a long recording (1024×512, drive-by looped, 1 frame in 4 scored)");
            Console.WriteLine();
            string longer = Path.Combine(dir, "long.mp4");
            Ffmpeg("-stream_loop", "14", "-i", drive, "-c", "copy", longer);
            var sampling = RecordingSampling.Every(4);
            var video = VideoRecording.Open(longer, new RecordingOptions { Sampling = sampling });
            var rss = new List<(int Frames, double Mib)>();
            var watch = Stopwatch.StartNew();
            var final = RecordingRun.Score(local.Runner, local.Lease, video, longer, sampling, local.Version.Defaults, new TrackingSettings(), Path.Combine(dir, "out-long"),
                new Progress(n =>
                {
                    if (n == 5 || n % 20 == 0) rss.Add((n, Process.GetCurrentProcess().WorkingSet64 / 1048576.0));
                }));
            Console.WriteLine($"| frames scored | resident MiB |");
            Console.WriteLine("|---|---|");
            foreach (var (n, mib) in rss) Console.WriteLine($"| {n} | {mib:0} |");
            Console.WriteLine($"\n{final.FramesScored} frames scored of {video.Header.FrameCount} decoded in {watch.Elapsed.TotalSeconds:0} s; " +
                              $"{final.TracksFound} tracks, {final.TracksKept} kept.");
        }
        finally
        {
            Directory.Delete(dir, recursive: true);
        }
    }

    private sealed class Progress(Action<int> report) : IProgress<int>
    {
        public void Report(int value) => report(value);
    }

    private static double FfmpegCoreMsPerFrame(string mp4, int w, int h)
    {
        int frameBytes = w * h * 3, frames = 0;
        var t = Stopwatch.StartNew();
        var sink = new StreamPipeSink(async (stream, cancel) =>
        {
            var buffer = new byte[frameBytes];
            while (true)
            {
                int got = 0;
                while (got < frameBytes)
                {
                    int n = await stream.ReadAsync(buffer.AsMemory(got, frameBytes - got), cancel);
                    if (n == 0) break;
                    got += n;
                }
                if (got < frameBytes) break;
                using var image = Image.LoadPixelData<Rgb24>(buffer, w, h); // the same work our pipe does per frame
                frames++;
            }
        });
        FFMpegArguments.FromFileInput(mp4)
            .OutputToPipe(sink, o => o.ForceFormat("rawvideo").WithCustomArgument("-pix_fmt rgb24 -threads 1"))
            .ProcessSynchronously();
        return t.Elapsed.TotalMilliseconds / Math.Max(1, frames);
    }

    private static string Encode(string dir, ApronDriveBy drive, string name)
    {
        string path = Path.Combine(dir, name);
        var start = new ProcessStartInfo("ffmpeg") { RedirectStandardInput = true, UseShellExecute = false };
        foreach (string a in (string[])["-hide_banner", "-loglevel", "error", "-y", "-f", "rawvideo", "-pix_fmt", "rgb24",
                     "-s", $"{drive.FrameWidth}x{drive.FrameHeight}", "-r", "10", "-i", "pipe:0", "-c:v", "libx264", "-preset", "veryfast",
                     "-crf", "18", "-pix_fmt", "yuv420p", path])
            start.ArgumentList.Add(a);
        using var p = Process.Start(start)!;
        for (int i = 0; i < drive.FrameCount; i++) p.StandardInput.BaseStream.Write(drive.Rgb(i));
        p.StandardInput.Close();
        p.WaitForExit();
        return path;
    }

    private static void Ffmpeg(params string[] args)
    {
        var start = new ProcessStartInfo("ffmpeg") { UseShellExecute = false };
        foreach (string a in (string[])["-hide_banner", "-loglevel", "error", "-y", .. args]) start.ArgumentList.Add(a);
        using var p = Process.Start(start)!;
        p.WaitForExit();
    }
}
