namespace Strayspot.Service.Recordings;

/// <summary>Limits and sampling for reading recordings.</summary>
public sealed record RecordingOptions
{
    public RecordingSampling Sampling { get; init; } = RecordingSampling.EveryFrame;
    /// <summary>Frames with more pixels than this are refused from the stream's header, before decoding (as for single frames).</summary>
    public long MaxPixels { get; init; } = 40_000_000;
    /// <summary>Time limit on ffprobe reading a header.</summary>
    public TimeSpan HeaderLimit { get; init; } = TimeSpan.FromSeconds(20);
    /// <summary>Longest wait for ffmpeg to hand over the next frame (time spent scoring does not count).</summary>
    public TimeSpan FrameWaitLimit { get; init; } = TimeSpan.FromSeconds(30);
    /// <summary>Time limit on one recording's whole decode, scoring included.</summary>
    public TimeSpan TotalLimit { get; init; } = TimeSpan.FromHours(4);
    /// <summary>Timestamps of an image sequence: frame i is at i / rate seconds.</summary>
    public double SequenceFrameRate { get; init; } = 10;
    /// <summary>Folder holding ffmpeg and ffprobe; null: <see cref="FfmpegTools.FolderVariable"/> or the PATH.</summary>
    public string? FfmpegFolder { get; init; }
}
