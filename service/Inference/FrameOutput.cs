using System.Text.Json;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Frames;
using Strayspot.Service.Rendering;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Inference;

/// <summary>
/// Scores one decoded frame through a model bundle and writes its artifacts and <c>report.json</c> into a folder:
/// the one path shared by the score verb and batches.
/// </summary>
public sealed class FrameOutput
{
    public const string ReportFile = "report.json";

    private readonly ModelBundle _bundle;
    private readonly IReadOnlyList<Rgb24> _colors;
    private readonly IReadOnlyList<string> _names;

    public FrameOutput(ModelBundle bundle)
    {
        _bundle = bundle;
        _colors = ArtifactWriter.ColorsOf(bundle.Model.Descriptor);
        _names = bundle.ClassNames;
        Model = new ModelReport(bundle.Name, bundle.Model.ModelSha256, bundle.Profile.Version);
    }

    public ModelReport Model { get; }
    public ModelBundle Bundle => _bundle;
    public IReadOnlyList<string> ClassNames => _names;

    /// <summary>
    /// Scores <paramref name="frame"/> and writes its files into <paramref name="folder"/>. <paramref name="inspect"/>
    /// sees the scored maps while they are valid (they are the scorer's buffers).
    /// </summary>
    public FrameReport Write(DecodedFrame frame, string frameId, string folder, ScoringOptions? options = null,
        Action<FrameScoring>? inspect = null, IReadOnlyList<string>? artifacts = null)
    {
        var used = options ?? _bundle.Defaults;
        _bundle.EnsureCanScore(used); // [setup] refuse before any file is written
        var report = _bundle.Scorer.Score(frame, (scored, timings) =>
        {
            Directory.CreateDirectory(folder);
            var written = ArtifactWriter.Write(scored, artifacts ?? ArtifactWriter.All, _colors, frame.Image, folder);
            var r = FrameReport.From(scored, used, _names, frameId, Model) with
            {
                Artifacts = written,
                Warnings = _bundle.WarningsFor(frame.Width, frame.Height, used),
            };
            r.TimingsMs["preprocess"] = timings.Preprocess.TotalMilliseconds;
            r.TimingsMs["inference"] = timings.Inference.TotalMilliseconds;
            inspect?.Invoke(scored);
            return r;
        }, used);
        AtomicFile.WriteAllBytes(Path.Combine(folder, ReportFile), JsonSerializer.SerializeToUtf8Bytes(report, FrameReport.JsonOptions));
        return report;
    }
}
