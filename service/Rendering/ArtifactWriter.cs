using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Models;

namespace Strayspot.Service.Rendering;

/// <summary>Writes a scored frame's artifacts into its folder: the one place that names and renders them.</summary>
public static class ArtifactWriter
{
    /// <summary>Artifact name → file name inside the frame's folder.</summary>
    public static readonly IReadOnlyDictionary<string, string> Files = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["classes"] = "classes.png",
        ["mask"] = "mask.png",
        ["heat"] = "heat.png",
        ["overlay"] = "overlay.png",
        ["score"] = "score.npy",
        ["score16"] = "score16.png",
    };

    public static readonly IReadOnlyList<string> All = ["classes", "mask", "heat", "overlay", "score", "score16"];

    /// <summary>
    /// Writes the named artifacts (each atomically) and returns artifact name → file name for those written.
    /// The overlay needs the original <paramref name="frame"/> and is skipped without it.
    /// </summary>
    public static Dictionary<string, string> Write(FrameScoring s, IEnumerable<string> artifacts, IReadOnlyList<Rgb24> classColors,
        Image<Rgb24>? frame, string folder, ArtifactOptions? options = null)
    {
        var written = new Dictionary<string, string>(StringComparer.Ordinal);
        var scale = HeatScale.For(s, (options ?? ArtifactOptions.Default).HeatScale);
        foreach (string name in artifacts)
        {
            if (!Files.TryGetValue(name, out string? file)) throw new ArgumentException($"Unknown artifact '{name}'.", nameof(artifacts));
            string path = Path.Combine(folder, file);
            switch (name)
            {
                case "classes":
                    using (var img = ArtifactRenderer.ClassMap(s.ClassIndex, s.Width, s.Height, classColors)) Save(img, path);
                    break;
                case "mask":
                    using (var img = ArtifactRenderer.Mask(s.Mask, s.Width, s.Height)) Save(img, path);
                    break;
                case "heat":
                    using (var img = ArtifactRenderer.HeatMap(s.AnomalyScore, s.Width, s.Height, scale)) Save(img, path);
                    break;
                case "overlay":
                    if (frame is null) continue;
                    using (var img = OverlayRenderer.Render(frame, s.AnomalyScore, s.Mask, s.Regions.Regions, scale)) Save(img, path);
                    break;
                case "score16":
                    // Its scale is the report's scoreRange: value v stands for min + v·(max − min)/65535.
                    using (var img = ArtifactRenderer.Score16(s.AnomalyScore, s.Width, s.Height, out _, out _)) Save(img, path);
                    break;
                case "score":
                    var scores = s.AnomalyScore.ToArray();
                    AtomicFile.Write(path, stream => Npy.WriteFloat32(stream, scores, [s.Height, s.Width]));
                    break;
            }
            written[name] = file;
        }
        return written;
    }

    /// <summary>The descriptor's colours, generated ones for classes without a colour.</summary>
    public static IReadOnlyList<Rgb24> ColorsOf(ModelDescriptor descriptor) =>
        ColorScales.ClassColors(descriptor.Classes.Count, descriptor.Classes.Select(c => c.Color).ToList());

    private static void Save(Image image, string path) => AtomicFile.Write(path, stream => ArtifactRenderer.SavePng(image, stream));
}

/// <summary>Choices about how artifacts look; the defaults suit most uses.</summary>
public sealed record ArtifactOptions
{
    public static readonly ArtifactOptions Default = new();

    /// <summary>Heat colours on the fixed scale anchored at the threshold (default) or stretched to each frame's range.</summary>
    public HeatScaleMode HeatScale { get; init; } = HeatScaleMode.Fixed;
}
