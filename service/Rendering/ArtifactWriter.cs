using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Service.Rendering;

/// <summary>Writes one scored frame's artifacts into a folder and names them for the report.</summary>
public static class ArtifactWriter
{
    /// <param name="classColors">display colours; generated when null.</param>
    /// <param name="frame">the original frame, for the overlay; no overlay when null.</param>
    public static Dictionary<string, string> WriteAll(FrameScoring s, IReadOnlyList<Rgb24>? classColors, Image<Rgb24>? frame, string folder)
    {
        var colors = classColors ?? ColorScales.ClassColors(s.ClassCount);
        var (low, high) = HeatRange(s);
        var written = new Dictionary<string, string>();
        using (var img = ArtifactRenderer.ClassMap(s.ClassIndex, s.Width, s.Height, colors)) Save(img, folder, "classes.png", written, "classMap");
        using (var img = ArtifactRenderer.Mask(s.Mask, s.Width, s.Height)) Save(img, folder, "mask.png", written, "mask");
        using (var img = ArtifactRenderer.HeatMap(s.AnomalyScore, s.Width, s.Height, low, high)) Save(img, folder, "heat.png", written, "heatMap");
        if (frame is not null)
            using (var img = ArtifactRenderer.Overlay(frame, s.AnomalyScore, s.Mask, low, high)) Save(img, folder, "overlay.png", written, "overlay");
        string npy = Path.Combine(folder, "score.npy");
        var scores = s.AnomalyScore.ToArray();
        AtomicFile.Write(npy, stream => Npy.WriteFloat32(stream, scores, [s.Height, s.Width]));
        written["score"] = "score.npy";
        return written;
    }

    /// <summary>The heat scale spans the threshold's neighbourhood so the mask edge sits mid-scale.</summary>
    public static (float Low, float High) HeatRange(FrameScoring s)
    {
        float lo = System.Numerics.Tensors.TensorPrimitives.Min(s.AnomalyScore);
        float hi = System.Numerics.Tensors.TensorPrimitives.Max(s.AnomalyScore);
        return hi > lo ? (lo, hi) : (lo, lo + 1);
    }

    private static void Save(Image image, string folder, string name, Dictionary<string, string> written, string key)
    {
        AtomicFile.Write(Path.Combine(folder, name), stream => ArtifactRenderer.SavePng(image, stream));
        written[key] = name;
    }
}
