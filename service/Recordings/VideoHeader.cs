using System.Diagnostics;
using System.Globalization;
using System.Text.Json;
using Strayspot.Service.Models;

namespace Strayspot.Service.Recordings;

/// <summary>
/// What ffprobe reads from a video file's header, before any frame is decoded. <see cref="Width"/> and
/// <see cref="Height"/> are as stored; <see cref="UprightWidth"/> and <see cref="UprightHeight"/> after the rotation
/// in the stream's display matrix, which decoding applies. <see cref="FrameCount"/> and <see cref="FrameRate"/> are
/// what the header announces and may be absent.
/// </summary>
public sealed record VideoHeader(string Container, string Codec, int Width, int Height, int Rotation,
    double? FrameRate, double? DurationSeconds, long? FrameCount, double StartSeconds)
{
    public int UprightWidth => Math.Abs(Rotation % 180) == 90 ? Height : Width;
    public int UprightHeight => Math.Abs(Rotation % 180) == 90 ? Width : Height;

    /// <summary>
    /// Containers taken as recordings (ffprobe's format names). Anything else ffprobe can open (single images, text
    /// shown as video, raw pipes) is refused: a frame goes through the image decoder, and the rest is not a recording.
    /// </summary>
    public static readonly IReadOnlySet<string> Containers = new HashSet<string>(StringComparer.Ordinal)
    {
        "mov", "mp4", "matroska", "webm", "avi", "mpegts", "mpeg", "flv", "asf", "ogg", "mxf", "ivf", "yuv4mpegpipe", "h264", "hevc",
    };

    /// <summary>Runs ffprobe on <paramref name="path"/> within <paramref name="timeout"/>.</summary>
    public static VideoHeader Probe(FfmpegTools tools, string path, TimeSpan timeout, CancellationToken cancel = default)
    {
        var info = new FileInfo(path);
        if (!info.Exists) throw new FileNotFoundException($"No such recording: {path}.", path);
        string name = info.Name;
        if (info.Length == 0) throw new ModelException(RecordingErrorCodes.RecordingFormat, $"{name} is empty (0 bytes).");

        var start = new ProcessStartInfo(tools.Ffprobe)
        {
            RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false,
        };
        foreach (string a in (string[])["-v", "error", "-show_streams", "-show_format", "-of", "json", "--", path])
            start.ArgumentList.Add(a);
        using var process = Process.Start(start) ?? throw new ModelException(RecordingErrorCodes.DecoderMissing, "ffprobe did not start.");
        using var limit = CancellationTokenSource.CreateLinkedTokenSource(cancel);
        limit.CancelAfter(timeout);
        using (limit.Token.Register(() => Kill(process)))
        {
            var stdout = process.StandardOutput.ReadToEndAsync();
            var stderr = process.StandardError.ReadToEndAsync();
            process.WaitForExit();
            cancel.ThrowIfCancellationRequested();
            if (limit.IsCancellationRequested)
                throw new ModelException(RecordingErrorCodes.RecordingTimeout, $"Reading the header of {name} took longer than {timeout.TotalSeconds:0} s and was stopped.");
            if (process.ExitCode != 0)
                throw new ModelException(RecordingErrorCodes.RecordingFormat,
                    $"{name} is not a readable video file: {LastLine(stderr.Result, path, name)}");
            return Parse(stdout.Result, name);
        }
    }

    internal static VideoHeader Parse(string json, string name)
    {
        using var doc = JsonDocument.Parse(json);
        var root = doc.RootElement;
        string container = root.TryGetProperty("format", out var format) && format.TryGetProperty("format_name", out var fn) ? fn.GetString() ?? "" : "";
        if (!container.Split(',').Any(Containers.Contains))
            throw new ModelException(RecordingErrorCodes.RecordingFormat,
                $"{name} is not a video container this service reads (ffprobe sees '{container}'); expected one of MP4/MOV, Matroska/WebM, AVI, MPEG-TS and the like.");
        JsonElement? video = null;
        bool audio = false;
        if (root.TryGetProperty("streams", out var streams))
            foreach (var s in streams.EnumerateArray())
            {
                string type = s.TryGetProperty("codec_type", out var t) ? t.GetString() ?? "" : "";
                bool attached = s.TryGetProperty("disposition", out var d) && d.TryGetProperty("attached_pic", out var ap) && ap.GetInt32() == 1;
                if (type == "video" && !attached && video is null) video = s;
                if (type == "audio") audio = true;
            }
        if (video is not { } v)
            throw new ModelException(RecordingErrorCodes.RecordingFormat,
                audio ? $"{name} holds audio only: there is no video stream to score." : $"{name} has no video stream.");
        int width = v.TryGetProperty("width", out var w) ? w.GetInt32() : 0;
        int height = v.TryGetProperty("height", out var h) ? h.GetInt32() : 0;
        if (width <= 0 || height <= 0)
            throw new ModelException(RecordingErrorCodes.RecordingFormat, $"{name}: the video stream's header gives no frame size.");
        int rotation = 0;
        if (v.TryGetProperty("side_data_list", out var sides))
            foreach (var sd in sides.EnumerateArray())
                if (sd.TryGetProperty("rotation", out var r) && r.TryGetDouble(out double rot)) rotation = (int)Math.Round(rot);
        if (rotation == 0 && v.TryGetProperty("tags", out var tags) && tags.TryGetProperty("rotate", out var rt)
            && int.TryParse(rt.GetString(), CultureInfo.InvariantCulture, out int rotTag)) rotation = rotTag;
        return new VideoHeader(container, v.TryGetProperty("codec_name", out var c) ? c.GetString() ?? "?" : "?", width, height,
            rotation, Rational(v, "avg_frame_rate") ?? Rational(v, "r_frame_rate"),
            Number(v, "duration") ?? (root.TryGetProperty("format", out var f2) ? Number(f2, "duration") : null),
            v.TryGetProperty("nb_frames", out var nb) && long.TryParse(nb.GetString(), CultureInfo.InvariantCulture, out long n) ? n : null,
            Number(v, "start_time") ?? 0);
    }

    private static double? Number(JsonElement e, string key) =>
        e.TryGetProperty(key, out var p) && double.TryParse(p.GetString(), NumberStyles.Float, CultureInfo.InvariantCulture, out double d) && double.IsFinite(d) ? d : null;

    private static double? Rational(JsonElement e, string key)
    {
        if (!e.TryGetProperty(key, out var p) || p.GetString() is not { } s) return null;
        var parts = s.Split('/');
        if (parts.Length == 2 && double.TryParse(parts[0], CultureInfo.InvariantCulture, out double a)
            && double.TryParse(parts[1], CultureInfo.InvariantCulture, out double b) && a > 0 && b > 0) return a / b;
        return null;
    }

    /// <summary>ffmpeg's last complaint, with the full path shortened to the file name.</summary>
    internal static string LastLine(string stderr, string path, string name)
    {
        var lines = stderr.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);
        return lines.Length == 0 ? "the decoder gave no reason." : lines[^1].Replace(path, name, StringComparison.Ordinal);
    }

    internal static void Kill(Process process)
    {
        try { process.Kill(entireProcessTree: true); }
        catch (InvalidOperationException) { } // already gone
    }
}
