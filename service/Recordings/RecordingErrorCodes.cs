namespace Strayspot.Service.Recordings;

/// <summary>
/// Stable codes for recordings a run refuses, raised as <see cref="Models.ModelException"/> so the command line and
/// problem+json carry them like the frame codes; never rename one. Too many pixels uses
/// <see cref="Frames.FrameErrorCodes.TooLarge"/>, as for a single frame.
/// </summary>
public static class RecordingErrorCodes
{
    /// <summary>Not a recording: empty, not a video container, no video stream (audio only), or unreadable.</summary>
    public const string RecordingFormat = "recording-format";
    /// <summary>The decoder failed part-way (truncated or damaged data).</summary>
    public const string RecordingCorrupt = "recording-corrupt";
    /// <summary>Decoding exceeded its time limit (total, or waiting for the next frame) and was stopped.</summary>
    public const string RecordingTimeout = "recording-timeout";
    /// <summary>The ffmpeg and ffprobe programs are not installed.</summary>
    public const string DecoderMissing = "video-decoder-missing";
}
