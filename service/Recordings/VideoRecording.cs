using System.Buffers;
using System.Collections.Concurrent;
using System.Diagnostics;
using System.Globalization;
using System.Text.RegularExpressions;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;

namespace Strayspot.Service.Recordings;

/// <summary>
/// A video file read through an ffmpeg process: the header is probed first (pixel limit, rotation), then ffmpeg
/// decodes, applies the rotation, drops the frames the sampling skips and writes the rest as raw RGB to its output
/// pipe, one frame at a time; timestamps and frame indices come from ffmpeg's frame log on its error stream. The pipe
/// holds ffmpeg back while a frame is scored, so memory stays at a few frames whatever the length. The process is
/// killed when the enumeration ends early, is cancelled, or runs past a time limit.
/// </summary>
public sealed partial class VideoRecording : IRecording
{
    public static readonly IReadOnlyList<string> Extensions = [".mp4", ".m4v", ".mov", ".mkv", ".webm", ".avi", ".ts", ".mts", ".y4m"];

    private readonly string _path;
    private readonly RecordingOptions _options;
    private readonly FfmpegTools _tools;
    private readonly List<string> _notes = new();

    private VideoRecording(string path, RecordingOptions options, FfmpegTools tools, VideoHeader header)
    {
        _path = path; _options = options; _tools = tools; Header = header;
        Name = Path.GetFileNameWithoutExtension(path);
    }

    public string Name { get; }
    public VideoHeader Header { get; }
    public int Width => Header.UprightWidth;
    public int Height => Header.UprightHeight;
    public IReadOnlyList<string> Notes => _notes;

    public static bool IsVideoFile(string path) => Extensions.Contains(Path.GetExtension(path).ToLowerInvariant());

    /// <summary>Probes <paramref name="path"/> and checks its size; nothing is decoded yet.</summary>
    public static VideoRecording Open(string path, RecordingOptions? options = null, CancellationToken cancel = default)
    {
        options ??= new RecordingOptions();
        var tools = FfmpegTools.Locate(options.FfmpegFolder);
        var header = VideoHeader.Probe(tools, path, options.HeaderLimit, cancel);
        long pixels = (long)header.Width * header.Height;
        if (pixels > options.MaxPixels)
            throw new Strayspot.Service.Frames.FrameException(Strayspot.Service.Frames.FrameErrorCodes.TooLarge,
                $"{Path.GetFileName(path)}: its frames are {header.Width}×{header.Height} = {pixels:N0} pixels by the stream header; the limit is {options.MaxPixels:N0}.");
        return new VideoRecording(path, options, tools, header);
    }

    public IEnumerable<RecordingFrame> Frames(CancellationToken cancel = default)
    {
        int width = Width, height = Height, frameBytes = checked(width * height * 3);
        string? select = _options.Sampling.SelectExpression();
        // The first frame log numbers every decoded frame; after a select, the second one names the frames kept.
        string filters = select is null ? "showinfo=checksum=0" : $"showinfo=checksum=0,select='{select}',showinfo=checksum=0";
        var start = new ProcessStartInfo(_tools.Ffmpeg)
        {
            RedirectStandardOutput = true, RedirectStandardError = true, RedirectStandardInput = true, UseShellExecute = false,
        };
        foreach (string a in (string[])["-hide_banner", "-nostats", "-nostdin", "-loglevel", "info", "-threads", "1", "-i", _path,
                     "-map", "0:v:0", "-vf", filters, "-fps_mode", "passthrough", "-f", "rawvideo", "-pix_fmt", "rgb24", "pipe:1"])
            start.ArgumentList.Add(a);

        using var total = CancellationTokenSource.CreateLinkedTokenSource(cancel);
        total.CancelAfter(_options.TotalLimit);
        using var wait = CancellationTokenSource.CreateLinkedTokenSource(total.Token);
        using var process = Process.Start(start) ?? throw new ModelException(RecordingErrorCodes.DecoderMissing, "ffmpeg did not start.");
        using var kill = wait.Token.Register(() => VideoHeader.Kill(process));
        var log = new FrameLog(select is not null);
        var stderr = Task.Run(() => log.Read(process.StandardError));
        var stdout = process.StandardOutput.BaseStream;
        byte[] buffer = ArrayPool<byte>.Shared.Rent(frameBytes);
        int sample = 0;
        bool finished = false;
        try
        {
            while (true)
            {
                wait.CancelAfter(_options.FrameWaitLimit);
                int got = ReadFull(stdout, buffer, frameBytes);
                if (got == 0) break;
                if (got < frameBytes)
                    throw new ModelException(RecordingErrorCodes.RecordingCorrupt, $"{Name}: the decoder stopped inside a frame ({got} of {frameBytes} bytes).");
                if (!log.Next(out long index, out double pts))
                    throw new ModelException(RecordingErrorCodes.RecordingCorrupt, $"{Name}: a decoded frame came without its timestamp.");
                wait.CancelAfter(Timeout.InfiniteTimeSpan);
                CheckLimits(cancel, total, wait);
                var image = Image.LoadPixelData<Rgb24>(buffer.AsSpan(0, frameBytes), width, height);
                var frame = new DecodedFrame(image, Header.Container.Split(',')[0].ToUpperInvariant());
                yield return new RecordingFrame(RecordingFrame.IdOf(Name, index), index, sample++,
                    Math.Max(0, pts - Header.StartSeconds), frame);
            }
            process.WaitForExit();
            stderr.Wait();
            CheckLimits(cancel, total, wait);
            if (process.ExitCode != 0)
                throw new ModelException(RecordingErrorCodes.RecordingCorrupt,
                    $"{Name}: the decoder failed after {sample} frame(s): {log.LastComplaint(_path, Path.GetFileName(_path))}");
            if (sample == 0)
                throw new ModelException(RecordingErrorCodes.RecordingCorrupt, $"{Name}: no frame could be decoded: {log.LastComplaint(_path, Path.GetFileName(_path))}");
            if (Header.FrameCount is { } announced && log.Decoded < announced)
                _notes.Add($"decoded {log.Decoded} of the {announced} frames the header announces (damaged or truncated data?)");
            if (log.Damaged)
                _notes.Add($"the decoder reported damaged data: {log.LastComplaint(_path, Path.GetFileName(_path))}");
            finished = true;
        }
        finally
        {
            ArrayPool<byte>.Shared.Return(buffer);
            if (!finished) VideoHeader.Kill(process);
        }
    }

    private void CheckLimits(CancellationToken cancel, CancellationTokenSource total, CancellationTokenSource wait)
    {
        cancel.ThrowIfCancellationRequested();
        if (total.IsCancellationRequested)
            throw new ModelException(RecordingErrorCodes.RecordingTimeout, $"{Name}: decoding ran past its limit of {_options.TotalLimit} and was stopped.");
        if (wait.IsCancellationRequested)
            throw new ModelException(RecordingErrorCodes.RecordingTimeout,
                $"{Name}: the decoder gave no frame for {_options.FrameWaitLimit.TotalSeconds:0} s and was stopped.");
    }

    private static int ReadFull(Stream stream, byte[] buffer, int count)
    {
        int got = 0;
        while (got < count)
        {
            int n = stream.Read(buffer, got, count - got);
            if (n == 0) break;
            got += n;
        }
        return got;
    }

    /// <summary>Reads ffmpeg's frame log lines: the first log's (pts → index) and the kept frames' pts, in order.</summary>
    private sealed partial class FrameLog(bool selected)
    {
        private readonly BlockingCollection<(long Index, double Time)> _kept = new();
        private readonly Queue<(long Index, long Pts)> _decoded = new();
        private readonly Queue<string> _other = new();

        public long Decoded { get; private set; }
        public bool Damaged { get; private set; }
        // The size summary ffmpeg prints last would stand in for the complaint otherwise.
        private string? _firstDamage;


        public void Read(StreamReader reader)
        {
            try
            {
                while (reader.ReadLine() is { } line)
                {
                    var m = ShowInfo().Match(line);
                    if (!m.Success)
                    {
                        if (line.Contains("Parsed_showinfo", StringComparison.Ordinal)) continue;
                        if (line.Contains("rror", StringComparison.Ordinal) || line.Contains("nvalid", StringComparison.Ordinal)
                            || line.Contains("runcat", StringComparison.Ordinal))
                        {
                            Damaged = true;
                            _firstDamage ??= line;
                        }
                        _other.Enqueue(line);
                        if (_other.Count > 8) _other.Dequeue();
                        continue;
                    }
                    long n = long.Parse(m.Groups["n"].Value, CultureInfo.InvariantCulture);
                    long pts = long.Parse(m.Groups["pts"].Value, CultureInfo.InvariantCulture);
                    double time = double.Parse(m.Groups["t"].Value, NumberStyles.Float, CultureInfo.InvariantCulture);
                    if (m.Groups["log"].Value == "0")
                    {
                        Decoded = n + 1;
                        if (!selected) { _kept.Add((n, time)); continue; }
                        _decoded.Enqueue((n, pts));
                        continue;
                    }
                    // A kept frame: its decode index is that of the first-log entry with the same pts.
                    long index = -1;
                    while (_decoded.TryDequeue(out var d))
                        if (d.Pts == pts) { index = d.Index; break; }
                    _kept.Add((index, time));
                }
            }
            finally
            {
                _kept.CompleteAdding();
            }
        }

        public bool Next(out long index, out double time)
        {
            foreach (var k in _kept.GetConsumingEnumerable())
            {
                (index, time) = k;
                return index >= 0;
            }
            index = -1; time = 0;
            return false;
        }

        /// <summary>The first line that named damage, else the last line ffmpeg wrote (often only "Conversion failed!").</summary>
        public string LastComplaint(string path, string name) =>
            _firstDamage is not null ? VideoHeader.LastLine(_firstDamage, path, name)
            : _other.Count == 0 ? "the decoder gave no reason." : VideoHeader.LastLine(string.Join('\n', _other), path, name);

        [GeneratedRegex(@"Parsed_showinfo_(?<log>\d+) @ [^\]]*\] n: *(?<n>\d+) pts: *(?<pts>-?\d+) pts_time:(?<t>[-0-9.eE+]+)")]
        private static partial Regex ShowInfo();
    }
}
