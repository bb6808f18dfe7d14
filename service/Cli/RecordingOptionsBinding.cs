using System.CommandLine;
using Strayspot.Scoring.Tracks;
using Strayspot.Service.Recordings;

namespace Strayspot.Service.Cli;

/// <summary>Recording options of the <c>score</c> verb: sampling, image sequences and tracks.</summary>
public sealed class RecordingOptionsBinding
{
    public Option<int?> Every { get; } = new("--every") { Description = "recordings: score every Nth frame" };
    public Option<double?> PerSecond { get; } = new("--per-second") { Description = "recordings: score about R frames per second of recording" };
    public Option<bool> Sequences { get; } = new("--sequence") { Description = "read each folder as one recording (an image sequence of numbered frames)" };
    public Option<double?> SequenceRate { get; } = new("--sequence-rate") { Description = "frames per second of an image sequence, for its timestamps (default 10)" };
    public Option<int?> MinFrames { get; } = new("--min-frames") { Description = "persistence rule: keep tracks seen in at least K sampled frames (default 3; 1 keeps all)" };
    public Option<int?> MissedFrames { get; } = new("--missed-frames") { Description = "sampled frames a track may go unseen and still continue (default 1)" };

    public void AddTo(Command command)
    {
        foreach (var o in new Option[] { Every, PerSecond, Sequences, SequenceRate, MinFrames, MissedFrames })
            command.Options.Add(o);
    }

    /// <summary>Splits the inputs into recordings (video files; folders with <c>--sequence</c>) and frames.</summary>
    public (List<string> Recordings, List<string> Frames) Split(ParseResult p, IEnumerable<string> inputs)
    {
        bool sequences = p.GetValue(Sequences);
        var recordings = new List<string>();
        var frames = new List<string>();
        foreach (string input in inputs)
            (VideoRecording.IsVideoFile(input) && File.Exists(input) || sequences && Directory.Exists(input) ? recordings : frames).Add(input);
        return (recordings, frames);
    }

    public RecordingOptions Options(ParseResult p)
    {
        if (p.GetValue(Every) is not null && p.GetValue(PerSecond) is not null)
            throw new Models.ModelException(RecordingErrorCodes.RecordingFormat, "Choose one of --every and --per-second.");
        if (p.GetValue(Every) is < 1) throw Invalid($"--every must be at least 1; got {p.GetValue(Every)}.");
        if (p.GetValue(PerSecond) is { } ps && !(ps > 0 && double.IsFinite(ps))) throw Invalid($"--per-second must be a positive number; got {ps}.");
        if (p.GetValue(SequenceRate) is { } sr && !(sr > 0 && double.IsFinite(sr))) throw Invalid($"--sequence-rate must be a positive number; got {sr}.");
        var sampling = p.GetValue(Every) is { } n ? RecordingSampling.Every(n)
            : p.GetValue(PerSecond) is { } r ? RecordingSampling.Rate(r) : RecordingSampling.EveryFrame;
        var o = new RecordingOptions { Sampling = sampling };
        return p.GetValue(SequenceRate) is { } rate ? o with { SequenceFrameRate = rate } : o;
    }

    private static Strayspot.Scoring.Logits.ScoringInputException Invalid(string message) =>
        new(Strayspot.Scoring.Logits.ScoringErrorCodes.Options, message);

    public TrackingSettings Tracking(ParseResult p)
    {
        if (p.GetValue(MinFrames) is < 1) throw Invalid($"--min-frames must be at least 1; got {p.GetValue(MinFrames)}.");
        if (p.GetValue(MissedFrames) is < 0) throw Invalid($"--missed-frames must be 0 or more; got {p.GetValue(MissedFrames)}.");
        var t = new TrackingSettings();
        if (p.GetValue(MinFrames) is { } k) t = t with { MinimumFramesSeen = k };
        if (p.GetValue(MissedFrames) is { } m) t = t with { Linking = t.Linking with { MissedFrames = m } };
        t.Linking.Validate();
        return t;
    }
}
