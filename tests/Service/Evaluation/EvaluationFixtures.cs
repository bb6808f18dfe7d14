using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Evaluation;

/// <summary>Small evaluation inputs on disk: a copy of the committed demo model and 256×128 held-out debris frames.</summary>
internal static class EvaluationFixtures
{
    public const int Width = 256, Height = 128;

    public static string RepositoryRoot
    {
        get
        {
            var dir = new DirectoryInfo(AppContext.BaseDirectory);
            while (dir is not null && !File.Exists(Path.Combine(dir.FullName, "Service.sln"))) dir = dir.Parent;
            return dir?.FullName ?? throw new InvalidOperationException("Repository root (Service.sln) not found above " + AppContext.BaseDirectory);
        }
    }

    /// <summary>model.onnx, descriptor.json and calibration.json of models/demo, copied so a test may add a profile.</summary>
    public static string CopyDemoModel(string into)
    {
        string source = Path.Combine(RepositoryRoot, "models", "demo");
        Directory.CreateDirectory(into);
        foreach (string f in new[] { DemoAssets.ModelFile, DemoAssets.DescriptorFile, DemoAssets.CalibrationFile })
            File.Copy(Path.Combine(source, f), Path.Combine(into, f));
        return into;
    }

    /// <summary>Held-out debris frames in the flat layout (frame_/mask_/labels_), small so a test runs in seconds.</summary>
    public static string WriteFlatDataset(string into, int frames, bool labels = false)
    {
        Directory.CreateDirectory(into);
        var set = DemoAssets.HeldOut(frames, new DemoBuildOptions { Width = Width, Height = Height });
        for (int i = 0; i < set.Count; i++)
        {
            var f = set[i];
            DemoPng.SaveRgb(Path.Combine(into, $"frame_{i:D3}.png"), f.Frame.Rgb, Width, Height);
            DemoPng.SaveGray(Path.Combine(into, $"mask_{i:D3}.png"), f.AnomalyMask, Width, Height);
            if (labels) DemoPng.SaveGray(Path.Combine(into, $"labels_{i:D3}.png"), f.Frame.Labels, Width, Height);
        }
        return into;
    }
}
