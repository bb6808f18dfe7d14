using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Hosting;
using Strayspot.Service.Models;
using Strayspot.Service.Rendering;

namespace Strayspot.Service.Api;

/// <summary>Writes only the artifacts a client asked for into the frame's folder (file names as in <see cref="ArtifactStore.Files"/>).</summary>
public static class FrameArtifacts
{
    public static void Write(FrameScoring s, IReadOnlyList<string> artifacts, IReadOnlyList<Rgb24> classColors, Image<Rgb24>? frame, string folder)
    {
        if (artifacts.Count == 0) return;
        var (low, high) = ArtifactWriter.HeatRange(s);
        foreach (string name in artifacts)
        {
            string path = Path.Combine(folder, ArtifactStore.Files[name]);
            switch (name)
            {
                case "classes":
                    using (var img = ArtifactRenderer.ClassMap(s.ClassIndex, s.Width, s.Height, classColors)) Save(img, path);
                    break;
                case "mask":
                    using (var img = ArtifactRenderer.Mask(s.Mask, s.Width, s.Height)) Save(img, path);
                    break;
                case "heat":
                    using (var img = ArtifactRenderer.HeatMap(s.AnomalyScore, s.Width, s.Height, low, high)) Save(img, path);
                    break;
                case "overlay" when frame is not null:
                    using (var img = ArtifactRenderer.Overlay(frame, s.AnomalyScore, s.Mask, low, high)) Save(img, path);
                    break;
                case "score":
                    var scores = s.AnomalyScore.ToArray();
                    AtomicFile.Write(path, stream => Npy.WriteFloat32(stream, scores, [s.Height, s.Width]));
                    break;
            }
        }
    }

    /// <summary>The descriptor's colours, generated ones for classes without a colour.</summary>
    public static IReadOnlyList<Rgb24> ColorsOf(ModelDescriptor descriptor)
    {
        var generated = ColorScales.ClassColors(descriptor.Classes.Count);
        var colors = new Rgb24[descriptor.Classes.Count];
        for (int i = 0; i < colors.Length; i++)
            colors[i] = ColorScales.TryParseHex(descriptor.Classes[i].Color, out var c) ? c : generated[i];
        return colors;
    }

    private static void Save(Image image, string path) => AtomicFile.Write(path, stream => ArtifactRenderer.SavePng(image, stream));
}
