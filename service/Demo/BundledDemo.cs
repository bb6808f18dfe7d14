using System.Reflection;

namespace Strayspot.Service.Demo;

/// <summary>The demo model folder and frames embedded in the executable, written out on request.</summary>
public static class BundledDemo
{
    private const string Prefix = "demo/";

    /// <summary>Writes the demo model folder to <paramref name="modelFolder"/> and its frames to <paramref name="framesFolder"/>.</summary>
    public static (string ModelFolder, IReadOnlyList<string> Frames) Extract(string modelFolder, string framesFolder)
    {
        var assembly = typeof(BundledDemo).Assembly;
        var frames = new List<string>();
        Directory.CreateDirectory(modelFolder);
        Directory.CreateDirectory(framesFolder);
        foreach (string name in assembly.GetManifestResourceNames().Where(n => n.StartsWith(Prefix, StringComparison.Ordinal)).Order(StringComparer.Ordinal))
        {
            string relative = name[Prefix.Length..].Replace('\\', '/');
            bool isFrame = relative.StartsWith("frames/", StringComparison.Ordinal);
            string target = isFrame
                ? Path.Combine(framesFolder, Path.GetFileName(relative))
                : Path.Combine(modelFolder, Path.GetFileName(relative));
            using var resource = assembly.GetManifestResourceStream(name)!;
            AtomicFile.Write(target, resource.CopyTo);
            if (isFrame) frames.Add(target);
        }
        if (!File.Exists(Path.Combine(modelFolder, "model.onnx")))
            throw new InvalidOperationException("This build carries no demo model (models/demo was missing when it was built).");
        return (modelFolder, frames);
    }
}
