using System.CommandLine;
using System.Text.Json;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Calibration;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Service.Reports;
using Strayspot.Service.Rendering;

namespace Strayspot.Service.Cli;

/// <summary>
/// Scores frames (files or a folder) through a model folder and writes, per frame, the report and PNG artifacts,
/// plus <c>ranking.json</c>: every frame and every recording's time segment, highest score first.
/// </summary>
public static class ScoreVerb
{
    public static Command Create()
    {
        var model = new Argument<DirectoryInfo>("model") { Description = "model folder (model.onnx, descriptor.json, calibration.json or statistics.json, optional profile.json)" };
        var frames = new Argument<string[]>("frames") { Description = $"frame files ({FrameFormats.Listed}), folders of them (subfolders included), .zip/.tar archives of them, or recordings (video files; folders with --sequence)", Arity = ArgumentArity.OneOrMore };
        var output = new Option<DirectoryInfo>("--out") { Description = "output folder", Required = true };
        var threads = new Option<int?>("--threads") { Description = "ONNX Runtime intra-op threads (default or 0: every core)" };
        var artifacts = new Option<string?>("--artifacts")
        {
            Description = $"comma-separated files to write per frame ({string.Join(", ", ArtifactWriter.All)}), 'all' or 'none' " +
                          $"(default: {string.Join(",", ArtifactChoice.Lean)}; report.json is always written)",
        };
        var scoring = new ScoringOptionsBinding();
        var recordings = new RecordingOptionsBinding();
        var command = new Command("score", "Score frames or recordings through a model and write reports and PNG artifacts (tracks for recordings).");
        command.Arguments.Add(model);
        command.Arguments.Add(frames);
        command.Options.Add(output);
        command.Options.Add(threads);
        command.Options.Add(artifacts);
        scoring.AddTo(command);
        recordings.AddTo(command);
        command.SetAction(p => CliApp.Guard(() =>
        {
            var (videos, loose) = recordings.Split(p, p.GetValue(frames)!);
            var recordingOptions = recordings.Options(p);
            var tracking = recordings.Tracking(p);
            var files = loose.Count > 0 ? ExpandFrames(loose) : [];
            if (files.Count == 0 && videos.Count == 0)
                throw new FrameException(FrameErrorCodes.Missing, $"The frames given hold no {FrameFormats.Listed} files.");
            using var local = LocalModel.Open(p.GetValue(model)!.FullName, ParallelSettings.FromThreads(p.GetValue(threads)));
            if (local.Version.Warning is not null) Console.Error.WriteLine($"warning: {local.Version.Warning}");
            var options = scoring.Apply(p, local.Version.Defaults);
            ModelReadiness.EnsureCanScore(local.Lease.Session, local.Version.Statistics, options, local.Version.Folder);
            foreach (var w in local.Version.WarningsFor(0, 0, options).Where(w => w.Code == ScoringWarnings.ThresholdOutOfRange))
                Console.Error.WriteLine($"warning [{w.Code}]: {w.Message}");
            string outFolder = p.GetValue(output)!.FullName;
            var segments = videos.Count > 0 ? ScoreRecordings.Run(local, videos, recordingOptions, tracking, options, outFolder, Console.Out) : [];
            if (files.Count == 0)
            {
                WriteRanking(outFolder, segments);
                Console.WriteLine($"ranking: {Path.Combine(outFolder, RankingFile)}");
                return CliApp.ExitOk;
            }
            var chosen = ParseArtifacts(p.GetValue(artifacts));
            var ranking = FrameProgress.Run("scoring", files.Count, Console.Out, progress => ScoreAll(local, files, options, outFolder, progress, chosen));
            Console.WriteLine($"scored {ranking.Count} frame(s) into {outFolder}");
            foreach (var r in ranking.Take(5))
                Console.WriteLine($"  {r.FrameScore,8:0.000}  {r.RegionCount,3} region(s)  {r.Frame}");
            if (segments.Count > 0) WriteRanking(outFolder, [.. ranking, .. segments]);
            Console.WriteLine($"ranking: {Path.Combine(outFolder, RankingFile)}");
            return CliApp.ExitOk;
        }));
        return command;
    }

    public const string RankingFile = "ranking.json";

    /// <summary>
    /// One entry of ranking.json; <c>regionCount</c> is a count (a frame report's <c>regions</c> is the list). A
    /// recording's time segment is an entry too: <c>frame</c> is the recording's file, <c>frameScore</c> the segment's
    /// highest track score, <c>regionCount</c> its tracks, <c>report</c> its <c>tracks.json</c>, and the segment's
    /// rank within the recording, span and best frame follow.
    /// </summary>
    public sealed record RankedFrame(string Frame, float FrameScore, int RegionCount, double? AnomalousShare, string Report,
        string? Recording = null, int? Segment = null, double? StartSeconds = null, double? EndSeconds = null, string? BestFrameId = null,
        IReadOnlyList<int>? Tracks = null);

    /// <summary>Writes ranking.json: the entries, highest score first (stable, so equal scores keep their order).</summary>
    public static void WriteRanking(string outFolder, IEnumerable<RankedFrame> entries)
    {
        Directory.CreateDirectory(outFolder);
        var ranked = entries.OrderByDescending(e => e.FrameScore).ToList();
        AtomicFile.WriteAllBytes(Path.Combine(outFolder, RankingFile), JsonSerializer.SerializeToUtf8Bytes(ranked, FrameReport.JsonOptions));
    }

    /// <summary>Parses <c>--artifacts</c> (<see cref="ArtifactChoice"/>).</summary>
    public static IReadOnlyList<string> ParseArtifacts(string? text) =>
        ArtifactChoice.Parse(text, out string? error)
        ?? throw new Strayspot.Scoring.Logits.ScoringInputException(Strayspot.Scoring.Logits.ScoringErrorCodes.Options, "--artifacts: " + error);

    /// <summary>
    /// Scores each frame into its own subfolder (named by the frame's file stem) and writes ranking.json.
    /// <paramref name="inspect"/> sees each frame's scored maps (with the frame's path or id) while they are valid.
    /// </summary>
    public static IReadOnlyList<RankedFrame> ScoreAll(LocalModel model, IReadOnlyList<SourceFrame> files, ScoringOptions options,
        string outFolder, IProgress<FrameCount>? progress = null, IReadOnlyList<string>? artifacts = null,
        Action<string, FrameScoring>? inspect = null)
    {
        Directory.CreateDirectory(outFolder);
        var decoder = new FrameDecoder();
        var output = new FrameFolderWriter(model.Version);
        var ranked = new List<RankedFrame>(files.Count);
        var stems = new HashSet<string>(StringComparer.Ordinal);
        for (int i = 0; i < files.Count; i++)
        {
            string stem = Path.GetFileNameWithoutExtension(files[i].Id);
            if (!stems.Add(stem)) stem = $"{stem}-{i}";
            string folder = Path.Combine(outFolder, stem);
            using var frame = files[i].Decode(decoder);
            string file = files[i].Shown;
            var report = model.Runner.Score(model.Lease, frame, options, (scored, timings) =>
            {
                inspect?.Invoke(file, scored);
                return output.WriteAll(scored, timings, options, stem, folder, frame.Image, artifacts);
            });
            ranked.Add(new RankedFrame(file, report.FrameScore, report.Regions.Count, report.AnomalousShare, Path.Combine(stem, Rendering.ArtifactWriter.ReportFile)));
            progress?.Report(new FrameCount(i + 1, files.Count));
        }
        ranked.Sort((a, b) => b.FrameScore.CompareTo(a.FrameScore));
        WriteRanking(outFolder, ranked);
        return ranked;
    }

    /// <summary>The frames of files, folders (walked) and archives as given, in order; fails listing every missing path at once.</summary>
    public static IReadOnlyList<SourceFrame> ExpandFrames(IEnumerable<string> paths)
    {
        // Archives are unpacked under one temporary folder of this run, removed when the process ends.
        string unpackRoot = Path.Combine(Path.GetTempPath(), "strayspot-unpacked-" + Guid.NewGuid().ToString("N"));
        AppDomain.CurrentDomain.ProcessExit += (_, _) =>
        {
            try { if (Directory.Exists(unpackRoot)) Directory.Delete(unpackRoot, recursive: true); }
            catch (IOException) { } // best effort: the temp folder is the system's to clear after that
            catch (UnauthorizedAccessException) { }
        };
        return FrameSources.FromPaths(paths, unpackRoot).SelectMany(source => source.Frames()).ToList();
    }
}
