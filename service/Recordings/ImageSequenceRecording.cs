using System.Globalization;
using System.Text.RegularExpressions;
using Strayspot.Service.Calibration;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;

namespace Strayspot.Service.Recordings;

/// <summary>
/// A folder of numbered frames (<c>cam_0001.png</c>, <c>cam_0002.png</c>…) read as a recording: ordered by the last
/// number in each name (so <c>f9</c> comes before <c>f10</c>), frame i at i / <see cref="RecordingOptions.SequenceFrameRate"/>
/// seconds. Every name must carry a number and no number may repeat, since the order is the point.
/// </summary>
public sealed partial class ImageSequenceRecording : IRecording
{
    private readonly IReadOnlyList<string> _files;
    private readonly RecordingOptions _options;
    private readonly FrameDecoder _decoder;

    public ImageSequenceRecording(string folder, RecordingOptions? options = null, FrameDecoder? decoder = null)
    {
        _options = options ?? new RecordingOptions();
        if (!(_options.SequenceFrameRate > 0 && double.IsFinite(_options.SequenceFrameRate)))
            throw new ArgumentOutOfRangeException(nameof(options), _options.SequenceFrameRate, "An image sequence's frame rate must be positive.");
        _decoder = decoder ?? new FrameDecoder(new FrameDecoderOptions { MaxPixels = _options.MaxPixels });
        Name = new DirectoryInfo(folder).Name;
        var numbered = new List<(long Number, string File)>();
        var seen = new Dictionary<long, string>();
        foreach (string f in Calibrator.ListFrames(folder))
        {
            var m = LastNumber().Match(Path.GetFileNameWithoutExtension(f));
            if (!m.Success)
                throw new ModelException(RecordingErrorCodes.RecordingFormat, $"Image sequence {Name}: '{Path.GetFileName(f)}' carries no frame number.");
            long n = long.Parse(m.Value, CultureInfo.InvariantCulture);
            if (!seen.TryAdd(n, f))
                throw new ModelException(RecordingErrorCodes.RecordingFormat,
                    $"Image sequence {Name}: '{Path.GetFileName(seen[n])}' and '{Path.GetFileName(f)}' carry the same frame number {n}.");
            numbered.Add((n, f));
        }
        numbered.Sort((a, b) => a.Number.CompareTo(b.Number));
        _files = numbered.ConvertAll(x => x.File);
        using var first = _decoder.DecodeFile(_files[0]);
        Width = first.Width;
        Height = first.Height;
    }

    public string Name { get; }
    public int Width { get; }
    public int Height { get; }
    public IReadOnlyList<string> Notes => [];
    public int FrameCount => _files.Count;

    public IEnumerable<RecordingFrame> Frames(CancellationToken cancel = default)
    {
        double? last = null;
        int sample = 0;
        for (int i = 0; i < _files.Count; i++)
        {
            cancel.ThrowIfCancellationRequested();
            double time = i / _options.SequenceFrameRate;
            if (!_options.Sampling.Takes(i, time, last)) continue;
            last = time;
            var frame = _decoder.DecodeFile(_files[i]);
            if (frame.Width != Width || frame.Height != Height)
            {
                frame.Dispose();
                throw new ModelException(RecordingErrorCodes.RecordingFormat,
                    $"Image sequence {Name}: '{Path.GetFileName(_files[i])}' is {frame.Width}×{frame.Height}, the sequence is {Width}×{Height}.");
            }
            yield return new RecordingFrame(RecordingFrame.IdOf(Name, i), i, sample++, time, frame);
        }
    }

    [GeneratedRegex(@"\d+(?=\D*$)")]
    private static partial Regex LastNumber();
}
