using System.Text;
using Strayspot.Service.Models;
using Strayspot.Service.Recordings;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Recordings;

/// <summary>Each kind of bad recording gets a clear error with a stable code (or a right result), never a hang.</summary>
public sealed class RecordingBadInputTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-badvideo-").FullName;

    public void Dispose() => Directory.Delete(_dir, recursive: true);

    private string Write(string name, byte[] bytes)
    {
        string path = Path.Combine(_dir, name);
        File.WriteAllBytes(path, bytes);
        return path;
    }

    private static Strayspot.Scoring.CodedException Refused(string path, RecordingOptions? options = null) =>
        Assert.ThrowsAny<Strayspot.Scoring.CodedException>(() =>
        {
            foreach (var f in VideoRecording.Open(path, options).Frames()) f.Dispose();
        });

    [Fact]
    public void Missing_ffmpeg_names_the_package_to_install()
    {
        var e = Assert.Throws<ModelException>(() => VideoRecording.Open(Write("a.mp4", [1, 2, 3]), new RecordingOptions { FfmpegFolder = _dir }));
        Assert.Equal(RecordingErrorCodes.DecoderMissing, e.Code);
        Assert.Contains("apt-get install ffmpeg", e.Message);
    }

    [VideoFact]
    public void A_zero_length_file_is_refused_as_empty()
    {
        var e = Refused(Write("empty.mp4", []));
        Assert.Equal(RecordingErrorCodes.RecordingFormat, e.Code);
        Assert.Contains("empty", e.Message);
    }

    [VideoFact]
    public void Text_and_a_still_image_are_not_recordings()
    {
        var text = Refused(Write("notes.mp4", Encoding.UTF8.GetBytes(string.Concat(Enumerable.Repeat("not a video at all\n", 200)))));
        Assert.Equal(RecordingErrorCodes.RecordingFormat, text.Code);
        Assert.Contains("notes.mp4", text.Message);
        Assert.DoesNotContain(Path.GetTempPath(), text.Message);
        using var img = TestImages.Gradient(32, 16);
        var png = Refused(Write("still.mp4", TestImages.Png(img)));
        Assert.Equal(RecordingErrorCodes.RecordingFormat, png.Code);
        Assert.Contains("not a video container", png.Message);
    }

    [VideoFact]
    public void Audio_only_and_no_video_stream_are_told_apart()
    {
        string audio = Path.Combine(_dir, "tone.m4a");
        VideoFiles.Ffmpeg(["-f", "lavfi", "-i", "sine=frequency=440:duration=1", "-c:a", "aac", audio]);
        var a = Refused(audio);
        Assert.Equal(RecordingErrorCodes.RecordingFormat, a.Code);
        Assert.Contains("audio only", a.Message);

        string subs = Write("subs.srt", Encoding.UTF8.GetBytes("1\n00:00:00,000 --> 00:00:01,000\nhello\n\n"));
        string mkv = Path.Combine(_dir, "subtitles.mkv");
        VideoFiles.Ffmpeg(["-i", subs, "-c:s", "srt", mkv]);
        var s = Refused(mkv);
        Assert.Equal(RecordingErrorCodes.RecordingFormat, s.Code);
        Assert.Contains("no video stream", s.Message);
    }

    [VideoFact]
    public void A_huge_resolution_in_the_header_is_refused_before_decoding()
    {
        // A YUV4MPEG2 header announcing 20000×10000 (200 M pixels), then a few bytes of a first frame: nothing to decode.
        var e = Refused(Write("huge.y4m", Encoding.ASCII.GetBytes("YUV4MPEG2 W20000 H10000 F25:1 Ip A1:1 C420jpeg\nFRAME\n" + new string('\x10', 64))));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.TooLarge, e.Code);
        Assert.Contains("20000×10000", e.Message);
        // The same check with a lowered limit on a real, small MP4.
        string mp4 = Path.Combine(_dir, "small.mp4");
        VideoFiles.EncodeMp4(mp4, 64, 32, 10, VideoFiles.Counting(64, 32, 3));
        Assert.Equal(Strayspot.Service.Frames.FrameErrorCodes.TooLarge, Refused(mp4, new RecordingOptions { MaxPixels = 64 * 32 - 1 }).Code);
    }

    [VideoFact]
    public void A_truncated_file_is_an_error_or_its_frames_with_a_note()
    {
        string whole = Path.Combine(_dir, "whole.mp4");
        VideoFiles.EncodeMp4(whole, 64, 32, 10, VideoFiles.Counting(64, 32, 30));
        string fast = Path.Combine(_dir, "fast.mp4");
        VideoFiles.EncodeMp4(fast, 64, 32, 10, VideoFiles.Counting(64, 32, 30), "-movflags", "+faststart");
        var bytes = File.ReadAllBytes(whole);
        // Index at the end (ffmpeg's default for MP4): cut in half, the index is gone and nothing can be read.
        var cut = Refused(Write("cut.mp4", bytes[..(bytes.Length / 2)]));
        Assert.Equal(RecordingErrorCodes.RecordingFormat, cut.Code);
        Assert.Contains("cut.mp4", cut.Message);
        // Index first, three quarters kept: the frames there decode, and the recording says frames are missing.
        var fastBytes = File.ReadAllBytes(fast);
        var half = VideoRecording.Open(Write("half.mp4", fastBytes[..(fastBytes.Length * 3 / 4)]));
        int n = 0;
        foreach (var f in half.Frames()) using (f) n++;
        Assert.InRange(n, 1, 29);
        Assert.Contains(half.Notes, note => note.Contains("of the 30 frames"));
    }

    [VideoFact]
    public void Data_damaged_mid_stream_gives_the_frames_left_with_notes_quoting_the_decoders_complaint()
    {
        string whole = Path.Combine(_dir, "whole.mp4");
        VideoFiles.Ffmpeg(["-f", "lavfi", "-i", "testsrc=size=320x240:rate=10", "-t", "3", "-c:v", "libx264", "-pix_fmt", "yuv420p", whole]);
        var bytes = File.ReadAllBytes(whole);
        // Overwrite a stretch of the coded frames: the container stays readable, some frames do not.
        for (int i = bytes.Length / 3; i < bytes.Length / 3 + 3000; i++) bytes[i] = 0x5a;
        var damaged = VideoRecording.Open(Write("damaged.mp4", bytes));
        int n = 0;
        foreach (var f in damaged.Frames()) using (f) n++;
        Assert.InRange(n, 1, 29);
        Assert.Contains(damaged.Notes, note => note.Contains("of the 30 frames"));
        string complaint = Assert.Single(damaged.Notes, note => note.StartsWith("the decoder reported damaged data", StringComparison.Ordinal));
        // The note quotes the decoder's complaint, not the size summary ffmpeg prints last.
        Assert.DoesNotContain("muxing overhead", complaint);
        Assert.Matches("(?i)invalid|error|corrupt|missing", complaint[complaint.IndexOf(':')..]);
    }

    [VideoFact]
    public void A_decode_past_its_time_limit_is_stopped_with_a_clear_error()
    {
        string path = Path.Combine(_dir, "slow.mp4");
        VideoFiles.EncodeMp4(path, 64, 32, 10, VideoFiles.Counting(64, 32, 30));
        var e = Assert.Throws<ModelException>(() =>
        {
            foreach (var f in VideoRecording.Open(path, new RecordingOptions { TotalLimit = TimeSpan.FromMilliseconds(300) }).Frames())
                using (f) Thread.Sleep(100);
        });
        Assert.Equal(RecordingErrorCodes.RecordingTimeout, e.Code);
    }
}
