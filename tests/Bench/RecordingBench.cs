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

            Memory(local, dir);
        }
        finally
        {
            Directory.Delete(dir, recursive: true);
        }
    }

    /// <summary>Only the memory part: <c>-- recording-memory [--loops N]</c> (default 60).</summary>
    public static void RunMemory(int loops = 60)
    {
        string dir = Directory.CreateTempSubdirectory("strayspot-bench-mem-").FullName;
        try
        {
            using var local = LocalModel.Open(Path.Combine(EvaluationBench.RepositoryRoot(), "models", "demo"));
            Memory(local, dir, loops);
        }
        finally
        {
            Directory.Delete(dir, recursive: true);
        }
    }

    /// <summary>
    /// Resident memory along a long recording: a 512×256 drive-by (129 frames) looped 60 times by ffmpeg (7740 frames,
    /// 12.9 minutes at 10 frames/s), 1 frame in 2 scored through <c>RecordingRun</c>. The slope is a least-squares fit
    /// over the samples after the first tenth, so warm-up (sessions, pools, JIT) does not count as growth.
    /// </summary>
    private static void Memory(LocalModel local, string dir, int loops = 60)
    {
        Console.WriteLine();
        Console.WriteLine($"## Recordings: resident memory along a long recording (512×256 drive-by looped {loops} times, {loops * 129} frames, 1 in 2 scored)");
        Console.WriteLine();
        string clip = Encode(dir, new ApronDriveBy(512, 256, 1536, 8), "drive-512x256.mp4");
        string longer = Path.Combine(dir, "long.mp4");
        Ffmpeg("-stream_loop", (loops - 1).ToString(System.Globalization.CultureInfo.InvariantCulture), "-i", clip, "-c", "copy", longer);
        var sampling = RecordingSampling.Every(2);
        var video = VideoRecording.Open(longer, new RecordingOptions { Sampling = sampling });
        var samples = new List<(int Frames, double RssMib, double HeapMib)>();
        var live = new List<(int Frames, double Mib)>();
        var watch = Stopwatch.StartNew();
        var final = RecordingRun.Score(local.Runner, local.Lease, video, longer, sampling, local.Version.Defaults, new TrackingSettings(),
            Path.Combine(dir, "out-long"), new Progress(n =>
            {
                if (n % 100 != 0) return;
                using var self = Process.GetCurrentProcess();
                samples.Add((n, self.WorkingSet64 / 1048576.0, GC.GetGCMemoryInfo().HeapSizeBytes / 1048576.0));
                // Every 1000 frames, the live managed heap after a full collection: what the run really holds on to.
                if (n % 1000 == 0) live.Add((n, GC.GetTotalMemory(forceFullCollection: true) / 1048576.0));
            }));
        double seconds = watch.Elapsed.TotalSeconds;
        Console.WriteLine("| frames scored | resident MiB | managed heap MiB |");
        Console.WriteLine("|---|---|---|");
        foreach (var (n, rss, heap) in samples) Console.WriteLine($"| {n} | {rss:0.0} | {heap:0.0} |");
        var steady = samples.Skip(samples.Count / 10).ToList();
        var first = steady[0];
        var middle = steady[steady.Count / 2];
        var last = steady[^1];
        Console.WriteLine();
        Console.WriteLine($"{final.FramesScored} frames scored of {video.Header.FrameCount} decoded in {seconds:0} s ({final.FramesScored / seconds:0.00} frames/s); " +
                          $"{final.TracksFound} tracks, {final.TracksKept} kept.");
        Console.WriteLine($"resident after warm-up: first {first.RssMib:0.0} MiB (frame {first.Frames}), middle {middle.RssMib:0.0} MiB (frame {middle.Frames}), " +
                          $"last {last.RssMib:0.0} MiB (frame {last.Frames}); slope {1000 * Slope(steady.Select(x => (x.Frames, x.RssMib)).ToList()):0.00} MiB per 1000 scored frames " +
                          $"(managed heap {1000 * Slope(steady.Select(x => (x.Frames, x.HeapMib)).ToList()):0.00}).");
        Console.WriteLine($"live managed heap after a full collection: {string.Join(", ", live.Select(l => $"{l.Mib:0.0} MiB at {l.Frames}"))}; " +
                          $"slope {1000 * Slope(live):0.00} MiB per 1000 scored frames (the kept tracks in brief and the plot's points).");
    }

    /// <summary>Least-squares slope of y over x.</summary>
    private static double Slope(List<(int X, double Y)> points)
    {
        double mx = points.Average(p => p.X), my = points.Average(p => p.Y);
        double sxy = points.Sum(p => (p.X - mx) * (p.Y - my)), sxx = points.Sum(p => (p.X - mx) * (p.X - mx));
        return sxx > 0 ? sxy / sxx : 0;
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

    public static string Encode(string dir, ApronDriveBy drive, string name, int crf = 18)
    {
        string path = Path.Combine(dir, name);
        var start = new ProcessStartInfo("ffmpeg") { RedirectStandardInput = true, UseShellExecute = false };
        foreach (string a in (string[])["-hide_banner", "-loglevel", "error", "-y", "-f", "rawvideo", "-pix_fmt", "rgb24",
                     "-s", $"{drive.FrameWidth}x{drive.FrameHeight}", "-r", "10", "-i", "pipe:0", "-c:v", "libx264", "-preset", "veryfast",
                     "-crf", crf.ToString(System.Globalization.CultureInfo.InvariantCulture), "-pix_fmt", "yuv420p", path])
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
