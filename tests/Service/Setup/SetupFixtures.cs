using SixLabors.ImageSharp;
using Strayspot.Service.Calibration;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Setup;

/// <summary>A model folder built from a test graph, with a few noise frames beside it.</summary>
internal sealed class SetupFolder : IDisposable
{
    public static readonly ModelRuntimeOptions OneThread = new() { IntraOpThreads = 1, WarmUp = false };

    public SetupFolder(TestSegmentationGraph graph, ModelDescriptor? descriptor = null, int frames = 3, int width = 24, int height = 16)
    {
        Graph = graph;
        Model = graph.WriteFolder(Dir["model"], descriptor);
        Frames = Dir["frames"];
        Directory.CreateDirectory(Frames);
        for (int i = 0; i < frames; i++)
        {
            using var img = TestImages.Noise(width, height, seed: 70 + i);
            img.SaveAsPng(Path.Combine(Frames, $"f{i:D2}.png"));
        }
    }

    public TempFolder Dir { get; } = new();
    public TestSegmentationGraph Graph { get; }
    public string Model { get; }
    public string Frames { get; }
    public string DescriptorPath => Path.Combine(Model, ModelDescriptor.FileName);

    public CalibrationArtifact Calibrate()
    {
        using var model = SegmentationModel.LoadFolder(Model, OneThread);
        return new Calibrator(model, new FrameDecoder(), () => new PixelReductionMaxLogitReducer(),
            new CalibrationOptions { CheckpointEvery = 0, Workers = 1, MinimumCount = 1 })
            .Run(Calibrator.ListFrames(Frames), Path.Combine(Model, CalibrationArtifact.FileName))!;
    }

    /// <summary>A small labelled dataset (flat layout) of demo held-out frames with debris masks.</summary>
    public string WriteDataset() => Strayspot.Tests.Service.Evaluation.EvaluationFixtures.WriteFlatDataset(Dir["dataset"], 2);

    public void Dispose() => Dir.Dispose();
}

/// <summary>Runs the command line with the console captured; tests using it sit in <see cref="ConsoleCollection"/>, which runs alone.</summary>
internal static class CliRun
{
    public static (int Exit, string Out, string Err) Capture(params string[] args)
    {
        var oldOut = Console.Out;
        var oldErr = Console.Error;
        var outWriter = new StringWriter();
        var errWriter = new StringWriter();
        Console.SetOut(outWriter);
        Console.SetError(errWriter);
        try
        {
            var config = new System.CommandLine.InvocationConfiguration { Output = outWriter, Error = errWriter };
            int exit = Strayspot.Service.Cli.CliApp.Run(args, config);
            return (exit, outWriter.ToString(), errWriter.ToString());
        }
        finally
        {
            Console.SetOut(oldOut);
            Console.SetError(oldErr);
        }
    }
}

/// <summary>Console capture is process-wide: these tests run on their own.</summary>
[CollectionDefinition(Name, DisableParallelization = true)]
public sealed class ConsoleCollection
{
    public const string Name = "setup-console";
}
