using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Recordings;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Recordings;

/// <summary>Real ffmpeg decoding videos the tests encode themselves: indices, timestamps, sampling, rotation.</summary>
public sealed class VideoRecordingTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-video-").FullName;

    public void Dispose() => Directory.Delete(_dir, recursive: true);

    private string Counting(string name = "count.mp4", int frames = 20, params string[] extra)
    {
        string path = Path.Combine(_dir, name);
        VideoFiles.EncodeMp4(path, 64, 32, 10, VideoFiles.Counting(64, 32, frames), extra);
        return path;
    }

    private static double MeanBlue(RecordingFrame f)
    {
        double sum = 0;
        f.Frame.Image.ProcessPixelRows(rows =>
        {
            for (int y = 0; y < rows.Height; y++)
                foreach (var p in rows.GetRowSpan(y)) sum += p.B;
        });
        return sum / (f.Frame.Width * f.Frame.Height);
    }

    [VideoFact]
    public void Every_frame_comes_with_its_index_timestamp_and_pixels()
    {
        var video = VideoRecording.Open(Counting());
        Assert.Equal((64, 32), (video.Width, video.Height));
        Assert.Equal(20, video.Header.FrameCount);
        int n = 0;
        foreach (var f in video.Frames())
            using (f)
            {
                Assert.Equal(n, f.Index);
                Assert.Equal(n, f.Sample);
                Assert.Equal(n / 10.0, f.TimeSeconds, 3);
                Assert.Equal($"count@{n:D6}", f.Id);
                Assert.InRange(MeanBlue(f), n * 8 - 2, n * 8 + 2); // blue carries the frame number ×8; H.264 through limited-range YUV keeps it within 2
                n++;
            }
        Assert.Equal(20, n);
        Assert.Empty(video.Notes);
    }

    [VideoFact]
    public void Every_third_frame_keeps_the_decoded_index_and_time()
    {
        var video = VideoRecording.Open(Counting(), new RecordingOptions { Sampling = RecordingSampling.Every(3) });
        var seen = video.Frames().Select(f => { using (f) return (f.Index, f.Sample, Math.Round(f.TimeSeconds, 3), Math.Round(MeanBlue(f) / 8)); }).ToList();
        // The last number is the frame number read back from the pixels (blue = frame × 8).
        Assert.Equal([(0L, 0, 0.0, 0.0), (3, 1, 0.3, 3), (6, 2, 0.6, 6), (9, 3, 0.9, 9), (12, 4, 1.2, 12), (15, 5, 1.5, 15), (18, 6, 1.8, 18)], seen);
    }

    [VideoFact]
    public void Frames_per_second_takes_a_frame_once_the_interval_has_passed()
    {
        // 2.5 per second is one frame per 0.4 s: at 10 fps frames 0, 4, 8, 12, 16.
        var video = VideoRecording.Open(Counting(), new RecordingOptions { Sampling = RecordingSampling.Rate(2.5) });
        var indices = video.Frames().Select(f => { using (f) return f.Index; }).ToList();
        Assert.Equal([0L, 4, 8, 12, 16], indices);
    }

    [VideoFact]
    public void Rotation_metadata_is_applied_before_the_frames_come_out()
    {
        string plain = Counting();
        string rotated = Path.Combine(_dir, "rotated.mp4");
        VideoFiles.Ffmpeg(["-i", plain, "-c", "copy", "-metadata:s:v:0", "rotate=90", rotated]);
        var video = VideoRecording.Open(rotated);
        Assert.Equal(90, Math.Abs(video.Header.Rotation));
        Assert.Equal((32, 64), (video.Width, video.Height));
        using var first = video.Frames().First();
        Assert.Equal((32, 64), (first.Frame.Width, first.Frame.Height));
        // Red rises with x in the stored frame (x·4); upright, it must run down the rows and stay flat along them.
        var img = first.Frame.Image;
        Assert.InRange(Math.Abs(img[0, 2].R - img[31, 2].R), 0, 6);
        Assert.InRange(Math.Abs(img[5, 2].R - img[5, 61].R), 200, 255);
    }

    [VideoFact]
    public void A_variable_frame_rate_keeps_each_frame_s_own_timestamp()
    {
        // Ten frames; the sixth onwards shifted by half a second: 0.0…0.4, then 1.0…1.4.
        string path = Path.Combine(_dir, "vfr.mkv");
        VideoFiles.Ffmpeg(["-f", "rawvideo", "-pix_fmt", "rgb24", "-s", "64x32", "-r", "10", "-i", "pipe:0",
            "-vf", "setpts=(N+5*gte(N\\,5))/(10*TB)", "-fps_mode", "passthrough", "-c:v", "libx264", "-pix_fmt", "yuv420p", path],
            VideoFiles.Counting(64, 32, 10));
        var times = VideoRecording.Open(path).Frames().Select(f => { using (f) return Math.Round(f.TimeSeconds, 3); }).ToList();
        Assert.Equal([0.0, 0.1, 0.2, 0.3, 0.4, 1.0, 1.1, 1.2, 1.3, 1.4], times);
        // Two per second over the gap: 0.0, 0.5 is missing, so the next frame after 0.5 s (1.0), then 1.0 + 0.5 → none left.
        var sampled = VideoRecording.Open(path, new RecordingOptions { Sampling = RecordingSampling.Rate(2) }).Frames()
            .Select(f => { using (f) return Math.Round(f.TimeSeconds, 3); }).ToList();
        Assert.Equal([0.0, 1.0], sampled);
    }

    [VideoFact]
    public void Stopping_early_or_cancelling_ends_the_decoder()
    {
        string path = Counting("long.mp4", frames: 60);
        var video = VideoRecording.Open(path);
        using (var f = video.Frames().First()) Assert.Equal(0, f.Index);
        using var cancel = new CancellationTokenSource();
        int got = 0;
        Assert.ThrowsAny<OperationCanceledException>(() =>
        {
            foreach (var f in VideoRecording.Open(path).Frames(cancel.Token))
                using (f)
                    if (++got == 3) cancel.Cancel();
        });
        Assert.Equal(3, got);
    }
}
