using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Calibration;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;

namespace Strayspot.Service.Demo;

/// <summary>What the bundled demo is built from; the defaults produced the committed models/demo folder.</summary>
public sealed record DemoBuildOptions
{
    public int Width { get; init; } = ApronSceneGenerator.DefaultWidth;
    public int Height { get; init; } = ApronSceneGenerator.DefaultHeight;
    public int TrainingFrames { get; init; } = 10;
    public int TrainingSeed { get; init; } = 1;
    /// <summary>Demo frames under frames/: the first <see cref="DemoDebrisFrames"/> of them carry debris.</summary>
    public int DemoFrames { get; init; } = 4;
    public int DemoDebrisFrames { get; init; } = 2;
    public int DemoSeed { get; init; } = 5;
    /// <summary>Held-out debris frames written under heldout/; more come from <see cref="DemoAssets.HeldOut"/>.</summary>
    public int HeldOutFrames { get; init; } = 3;
    public int HeldOutSeed { get; init; } = 3;
    public DemoTrainingOptions Training { get; init; } = new();
}

/// <summary>One demo frame as written under frames/, and its debris mask (null: an ordinary frame).</summary>
public sealed record DemoFrame(string FileName, ApronFrame Frame, byte[]? DebrisMask);

public sealed record DemoBuildResult(DemoModel Model, CalibrationArtifact Calibration, IReadOnlyList<string> Files)
{
    public ClassStatistics Statistics => Calibration.ToStatistics();
}

/// <summary>
/// Regenerates the bundled demo (model, descriptor, calibration, frames, held-out debris set) from code alone; the
/// same options always give the same files (calibration.json up to its creation time and tool version).
/// </summary>
public static class DemoAssets
{
    public const string ModelFile = "model.onnx";
    public const string DescriptorFile = "descriptor.json";
    public const string CalibrationFile = CalibrationArtifact.FileName;
    public const string FramesFolder = "frames";
    public const string HeldOutFolder = "heldout";

    private static readonly JsonSerializerOptions DescriptorJson = new()
    {
        WriteIndented = true,
        DefaultIgnoreCondition = JsonIgnoreCondition.WhenWritingNull,
    };

    public static DemoBuildResult Build(string folder, DemoBuildOptions? options = null)
    {
        options ??= new DemoBuildOptions();
        if (options.Width % DemoFeatures.Stride != 0 || options.Height % DemoFeatures.Stride != 0)
            throw new ArgumentException($"Demo frames must be a multiple of {DemoFeatures.Stride} in both sides, got {options.Width}x{options.Height}.");
        Directory.CreateDirectory(folder);
        var files = new List<string>();

        var training = ApronSceneSet.Normal(options.TrainingFrames, options.TrainingSeed, options.Width, options.Height);
        var model = DemoModelTrainer.Train(training, options.Training);
        files.Add(Write(folder, ModelFile, DemoModelOnnx.ToBytes(model)));
        files.Add(Write(folder, DescriptorFile, JsonSerializer.SerializeToUtf8Bytes(Descriptor(), DescriptorJson)));
        var calibration = Calibrate(folder, training);
        files.Add(Path.Combine(folder, CalibrationFile));

        string frames = Path.Combine(folder, FramesFolder);
        Directory.CreateDirectory(frames);
        foreach (var demo in DemoFrames(options))
        {
            string path = Path.Combine(frames, demo.FileName);
            DemoPng.SaveRgb(path, demo.Frame.Rgb, demo.Frame.Width, demo.Frame.Height);
            files.Add(path);
        }

        files.AddRange(WriteHeldOut(Path.Combine(folder, HeldOutFolder), options.HeldOutFrames, options));
        return new DemoBuildResult(model, calibration, files);
    }

    /// <summary>
    /// The frames under frames/ with the ground truth the scene generator produced: <see cref="DemoFrame.DebrisMask"/>
    /// (0 normal, 1 debris, 255 ignore) on the debris frames, null on the ordinary ones.
    /// </summary>
    public static IReadOnlyList<DemoFrame> DemoFrames(DemoBuildOptions? options = null)
    {
        options ??= new DemoBuildOptions();
        var scenes = ApronSceneSet.Normal(options.DemoFrames, options.DemoSeed, options.Width, options.Height);
        var result = new List<DemoFrame>(scenes.Count);
        for (int i = 0; i < scenes.Count; i++)
        {
            if (i < options.DemoDebrisFrames)
            {
                var debris = ApronDebrisPainter.Paint(scenes[i], ApronSceneSet.FrameSeed(options.DemoSeed, i) + 7919, 4);
                result.Add(new DemoFrame($"apron_{i + 1:D2}_debris.png", debris.Frame, debris.AnomalyMask));
            }
            else
            {
                result.Add(new DemoFrame($"apron_{i + 1:D2}.png", scenes[i], null));
            }
        }
        return result;
    }

    /// <summary>Writes the first <paramref name="count"/> held-out debris frames and masks as frame_NNN.png / mask_NNN.png.</summary>
    public static IReadOnlyList<string> WriteHeldOut(string folder, int count, DemoBuildOptions? options = null)
    {
        options ??= new DemoBuildOptions();
        Directory.CreateDirectory(folder);
        var files = new List<string>();
        var set = HeldOut(count, options);
        for (int i = 0; i < set.Count; i++)
        {
            string framePath = Path.Combine(folder, $"frame_{i:D3}.png"), maskPath = Path.Combine(folder, $"mask_{i:D3}.png");
            DemoPng.SaveRgb(framePath, set[i].Frame.Rgb, options.Width, options.Height);
            DemoPng.SaveGray(maskPath, set[i].AnomalyMask, options.Width, options.Height);
            files.Add(framePath);
            files.Add(maskPath);
        }
        return files;
    }

    /// <summary>The held-out debris set: the first frames are the ones written under heldout/, any count can be regenerated.</summary>
    public static IReadOnlyList<ApronDebrisFrame> HeldOut(int count, DemoBuildOptions? options = null)
    {
        options ??= new DemoBuildOptions();
        return ApronSceneSet.Generate(count, options.HeldOutSeed, options.Width, options.Height);
    }

    /// <summary>
    /// Dynamic input: any frame size, padded to a multiple of 4 because the logits come out at a quarter of the input size.
    /// </summary>
    public static ModelDescriptor Descriptor() => new()
    {
        Name = "strayspot-demo-apron",
        Description = "Bundled demo: synthetic airport-apron frames from a vehicle camera, six classes, logits at 1/4 resolution. " +
                      "Built by DemoAssets.Build; not a production model.",
        Classes = ApronClasses.Names.Select((name, i) => new ClassDescriptor
        {
            Name = name,
            Color = ApronClasses.Colors[i],
            Surface = ApronClasses.IsSurface(i),
        }).ToList(),
        Input = new InputDescriptor
        {
            Tensor = DemoModelOnnx.InputName,
            Layout = "nchw",
            ChannelOrder = "rgb",
            ValueScale = 255f,
            Mean = [0f, 0f, 0f],
            Std = [1f, 1f, 1f],
            Size = new SizePolicy { Mode = "dynamic", PadMultiple = DemoFeatures.Stride },
        },
        Output = new OutputDescriptor { Tensor = DemoModelOnnx.OutputName, Kind = "logits" },
    };

    /// <summary>
    /// Per-class max-logit statistics over the training frames, measured the way a user calibrates: the frames as PNG
    /// files through the command line's calibrator (decoder, ONNX Runtime, logits resized to frame size).
    /// </summary>
    public static CalibrationArtifact Calibrate(string modelFolder, IReadOnlyList<ApronFrame> frames)
    {
        string framesFolder = Path.Combine(Path.GetTempPath(), "strayspot-demo-calibration-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(framesFolder);
        try
        {
            var paths = new List<string>(frames.Count);
            for (int i = 0; i < frames.Count; i++)
            {
                string path = Path.Combine(framesFolder, $"train_{i:D3}.png");
                DemoPng.SaveRgb(path, frames[i].Rgb, frames[i].Width, frames[i].Height);
                paths.Add(path);
            }
            // One thread per session: the same sums on any machine size.
            using var local = Inference.LocalModel.Open(Inference.ModelVersion.ReadForCalibration(modelFolder),
                new Inference.ParallelSettings { IntraOpThreads = 1, WarmUp = false });
            var calibrator = new Calibrator(local.Runner, local.Lease, new FrameDecoder(), () => new PixelReductionMaxLogitReducer(),
                new CalibrationOptions { CheckpointEvery = 0, Workers = Math.Min(2, Environment.ProcessorCount) });
            return calibrator.Run(paths, Path.Combine(modelFolder, CalibrationFile))
                   ?? throw new InvalidOperationException("Demo calibration stopped before the last frame.");
        }
        finally
        {
            try { Directory.Delete(framesFolder, recursive: true); } catch (IOException) { }
        }
    }

    private static string Write(string folder, string name, byte[] bytes)
    {
        string path = Path.Combine(folder, name);
        File.WriteAllBytes(path, bytes);
        return path;
    }
}
