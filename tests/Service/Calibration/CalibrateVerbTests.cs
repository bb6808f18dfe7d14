using System.CommandLine;
using SixLabors.ImageSharp;
using Strayspot.Service.Calibration;
using Strayspot.Service.Cli;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Calibration;

public class CalibrateVerbTests
{
    private static (int Code, string Output, string Error) Invoke(params string[] args)
    {
        var root = new RootCommand { CalibrateVerb.Create(() => new NaiveMaxLogitReducer()) };
        var output = new StringWriter();
        var error = new StringWriter();
        int code = root.Parse(args).Invoke(new InvocationConfiguration { Output = output, Error = error });
        return (code, output.ToString(), error.ToString());
    }

    private static string Frames(TempFolder dir, int n)
    {
        string folder = Path.Combine(dir.Path, "frames");
        Directory.CreateDirectory(folder);
        for (int i = 0; i < n; i++)
        {
            using var img = TestImages.Noise(16, 12, seed: i);
            img.SaveAsJpeg(Path.Combine(folder, $"a{i}.jpg"));
        }
        return folder;
    }

    [Fact]
    public void WritesCalibrationIntoTheModelFolderWithPlainProgress()
    {
        using var dir = new TempFolder();
        string model = new TestSegmentationGraph { Classes = 2, Stride = 2 }.WriteFolder(Path.Combine(dir.Path, "model"));
        var (code, output, error) = Invoke("calibrate", model, Frames(dir, 3), "--checkpoint-every", "2", "--workers", "1", "--threads", "1");
        Assert.True(code == 0, error);
        Assert.Contains("3/3 frames", output);
        Assert.Contains("frames/s", output);
        var artifact = CalibrationArtifact.Load(Path.Combine(model, "calibration.json"));
        Assert.Equal(3, artifact.FrameCount);
        Assert.Equal(16 * 12 * 3, artifact.Classes.Sum(c => c.Count));
    }

    [Fact]
    public void DescriptorWithWrongClassCountExitsTwoAndWritesNothing()
    {
        using var dir = new TempFolder();
        var graph = new TestSegmentationGraph { Classes = 4 };
        string model = graph.WriteFolder(Path.Combine(dir.Path, "model"), graph.Descriptor(classCount: 7));
        var (code, _, error) = Invoke("calibrate", model, Frames(dir, 1));
        Assert.Equal(2, code);
        Assert.Contains("model-output-mismatch", error);
        Assert.Contains("4 classes", error);
        Assert.False(File.Exists(Path.Combine(model, "calibration.json")));
    }

    [Fact]
    public void MissingFoldersExitTwo()
    {
        using var dir = new TempFolder();
        string model = new TestSegmentationGraph().WriteFolder(Path.Combine(dir.Path, "model"));
        Assert.Equal(2, Invoke("calibrate", dir["nope"], Frames(dir, 1)).Code);
        var (code, _, error) = Invoke("calibrate", model, dir["no-frames"]);
        Assert.Equal(2, code);
        Assert.Contains("does not exist", error);
    }
}
