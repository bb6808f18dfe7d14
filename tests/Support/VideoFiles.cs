using System.Diagnostics;
using Strayspot.Service.Recordings;

namespace Strayspot.Tests.Support;

/// <summary>
/// Real ffmpeg for the recording tests: tests make their own videos with it. Without ffmpeg the tests are skipped
/// with the reason (xunit 2 decides skips at discovery), never passed.
/// </summary>
public static class VideoFiles
{
    public static readonly string? SkipReason = Probe();

    private static string? Probe()
    {
        try { FfmpegTools.Locate(); return null; }
        catch (Exception e) { return $"ffmpeg is not installed (.ci/run installs Debian's 'ffmpeg'): {e.Message}"; }
    }

    /// <summary>Runs ffmpeg with <paramref name="args"/> (60 s limit), optionally writing <paramref name="stdin"/> frames to it.</summary>
    public static void Ffmpeg(IEnumerable<string> args, IEnumerable<byte[]>? stdin = null)
    {
        var tools = FfmpegTools.Locate();
        var start = new ProcessStartInfo(tools.Ffmpeg) { RedirectStandardInput = true, RedirectStandardError = true, UseShellExecute = false };
        foreach (string a in (string[])["-hide_banner", "-loglevel", "error", "-y", .. args]) start.ArgumentList.Add(a);
        using var p = Process.Start(start)!;
        var err = p.StandardError.ReadToEndAsync();
        if (stdin is not null)
            foreach (var frame in stdin) p.StandardInput.BaseStream.Write(frame);
        p.StandardInput.Close();
        if (!p.WaitForExit(60_000)) { p.Kill(true); throw new TimeoutException("ffmpeg ran over 60 s."); }
        if (p.ExitCode != 0) throw new InvalidOperationException($"ffmpeg failed: {err.Result}");
    }

    /// <summary>Encodes raw RGB frames (all <paramref name="width"/>×<paramref name="height"/>) to H.264 in MP4.</summary>
    public static void EncodeMp4(string path, int width, int height, double fps, IEnumerable<byte[]> frames, params string[] extra) =>
        Ffmpeg(["-f", "rawvideo", "-pix_fmt", "rgb24", "-s", $"{width}x{height}", "-r", fps.ToString(System.Globalization.CultureInfo.InvariantCulture),
            "-i", "pipe:0", "-c:v", "libx264", "-preset", "veryfast", "-crf", "12", "-pix_fmt", "yuv420p", .. extra, path], frames);

    /// <summary>Frames where pixel (x, y) carries x·4 + frame in red, y·4 in green and the frame number in blue.</summary>
    public static IEnumerable<byte[]> Counting(int width, int height, int count)
    {
        for (int f = 0; f < count; f++)
        {
            var rgb = new byte[width * height * 3];
            for (int y = 0; y < height; y++)
                for (int x = 0; x < width; x++)
                {
                    int i = (y * width + x) * 3;
                    rgb[i] = (byte)(x * 4); rgb[i + 1] = (byte)(y * 4); rgb[i + 2] = (byte)(f * 8);
                }
            yield return rgb;
        }
    }
}

public sealed class VideoFactAttribute : FactAttribute
{
    public VideoFactAttribute()
    {
        if (VideoFiles.SkipReason is { } reason) Skip = reason;
    }
}
