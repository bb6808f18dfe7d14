using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Inference;
using Strayspot.Service.Recordings;

namespace Strayspot.Service.Cli;

/// <summary>
/// The <c>score</c> verb's part for recordings: each into its own subfolder, with a short summary; returns each
/// recording's time segments as ranking entries, so ranking.json is the labelling queue over frames and recordings alike.
/// </summary>
public static class ScoreRecordings
{
    public static IRecording Open(string input, RecordingOptions options) =>
        Directory.Exists(input) ? new ImageSequenceRecording(input, options) : VideoRecording.Open(input, options);

    public static List<ScoreVerb.RankedFrame> Run(LocalModel model, IReadOnlyList<string> inputs, RecordingOptions recording, TrackingSettings tracking,
        ScoringOptions options, string outFolder, TextWriter output)
    {
        var ranked = new List<ScoreVerb.RankedFrame>();
        var names = new HashSet<string>(StringComparer.Ordinal);
        for (int i = 0; i < inputs.Count; i++)
        {
            var source = Open(inputs[i], recording);
            string name = names.Add(source.Name) ? source.Name : $"{source.Name}-{i}";
            string folder = Path.Combine(outFolder, name);
            output.WriteLine($"recording {source.Name}: {source.Width}×{source.Height}, {recording.Sampling}");
            var report = RecordingRun.Score(model.Runner, model.Lease, source, inputs[i], recording.Sampling, options, tracking, folder);
            output.WriteLine($"recording {source.Name}: {report.FramesScored} frame(s) over {report.DurationSeconds:0.0} s, " +
                             $"{report.TracksKept} track(s) kept of {report.TracksFound} (seen in ≥ {tracking.MinimumFramesSeen} frames)");
            foreach (var s in report.Segments.Take(5))
                output.WriteLine($"  {s.MaxScore,8:0.000}  {s.StartSeconds,8:0.00} s – {s.EndSeconds:0.00} s  track(s) {string.Join(",", s.Tracks)}");
            foreach (string note in report.Notes) output.WriteLine($"  note: {note}");
            output.WriteLine($"tracks: {Path.Combine(folder, RecordingRun.TracksFile)}");
            string tracksFile = Path.Combine(name, RecordingRun.TracksFile);
            foreach (var s in report.Segments)
                ranked.Add(new ScoreVerb.RankedFrame(inputs[i], s.MaxScore, s.Tracks.Count, null, tracksFile, source.Name, s.Rank, s.StartSeconds, s.EndSeconds,
                    s.BestFrameId, s.Tracks));
        }
        return ranked;
    }
}
