using System.Text.Json;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Rendering;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Inference;

/// <summary>
/// Turns one scored frame into its frame report and writes the chosen artifacts (and, for <c>score</c> and batches,
/// <c>report.json</c>) into the frame's folder. Scores nothing itself: the <see cref="FrameRunner"/> does.
/// </summary>
public sealed class FrameFolderWriter
{
    private readonly IReadOnlyList<Rgb24> _colors;

    public FrameFolderWriter(ModelVersion model)
    {
        _colors = ArtifactWriter.ColorsOf(model.Descriptor);
        ClassNames = model.ClassNames;
        Model = new ModelReport(model.Name, model.WeightsSha256 ?? "", model.Profile.Version);
    }

    public ModelReport Model { get; }
    public IReadOnlyList<string> ClassNames { get; }

    /// <summary>The frame report with every stage time: preprocess and inference (when the network ran) and the scoring core's.</summary>
    public FrameReport Report(FrameScoring scored, FrameTimings timings, ScoringOptions options, string frameId, LogitsReport? logits = null)
    {
        var report = FrameReport.From(scored, options, ClassNames, frameId, Model, logits) with { Warnings = timings.Warnings };
        if (timings.Preprocess > TimeSpan.Zero || timings.Inference > TimeSpan.Zero)
        {
            report.TimingsMs["preprocess"] = timings.Preprocess.TotalMilliseconds;
            report.TimingsMs["inference"] = timings.Inference.TotalMilliseconds;
        }
        return report;
    }

    /// <summary>Writes <paramref name="artifacts"/> into <paramref name="folder"/> (when given) and returns the report naming their files.</summary>
    public FrameReport Write(FrameScoring scored, FrameTimings timings, ScoringOptions options, string frameId, string? folder,
        IEnumerable<string> artifacts, Image<Rgb24>? image, LogitsReport? logits = null)
    {
        var report = Report(scored, timings, options, frameId, logits);
        if (folder is null) return report;
        Directory.CreateDirectory(folder);
        return report with { Artifacts = ArtifactWriter.Write(scored, artifacts, _colors, image, folder) };
    }

    /// <summary>The chosen artifacts (default every one) and <c>report.json</c>, as <c>score</c> and batches keep them.</summary>
    public FrameReport WriteAll(FrameScoring scored, FrameTimings timings, ScoringOptions options, string frameId, string folder, Image<Rgb24>? image,
        IReadOnlyList<string>? artifacts = null)
    {
        var report = Write(scored, timings, options, frameId, folder, artifacts ?? ArtifactWriter.All, image);
        AtomicFile.WriteAllBytes(Path.Combine(folder, ArtifactWriter.ReportFile), JsonSerializer.SerializeToUtf8Bytes(report, FrameReport.JsonOptions));
        return report;
    }
}
