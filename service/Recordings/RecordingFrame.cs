using Strayspot.Service.Frames;

namespace Strayspot.Service.Recordings;

/// <summary>
/// One sampled frame of a recording: <see cref="Index"/> is its position among all the recording's decoded frames,
/// <see cref="Sample"/> its position among the sampled ones, <see cref="TimeSeconds"/> its timestamp from the
/// recording's start. <see cref="Id"/> is stable: the recording's name and the frame index. Owns its pixels.
/// </summary>
public sealed class RecordingFrame(string id, long index, int sample, double timeSeconds, DecodedFrame frame) : IDisposable
{
    public string Id { get; } = id;
    public long Index { get; } = index;
    public int Sample { get; } = sample;
    public double TimeSeconds { get; } = timeSeconds;
    public DecodedFrame Frame { get; } = frame;

    public static string IdOf(string recording, long index) => $"{recording}@{index:D6}";

    public void Dispose() => Frame.Dispose();
}

/// <summary>
/// A recording as a stream of frames: each frame is decoded when asked for and belongs to the caller, so memory does
/// not grow with the recording's length. Enumerate once.
/// </summary>
public interface IRecording
{
    /// <summary>Name used in frame ids and output folders (the file or folder name without extension).</summary>
    string Name { get; }
    int Width { get; }
    int Height { get; }
    /// <summary>Remarks found while reading (e.g. fewer frames decoded than the header announced).</summary>
    IReadOnlyList<string> Notes { get; }
    IEnumerable<RecordingFrame> Frames(CancellationToken cancel = default);
}
