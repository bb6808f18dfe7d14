using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Models;

namespace Strayspot.Service.Demo;

/// <summary>What the bundled demo is built from; the defaults produced the committed models/demo folder.</summary>
public sealed record DemoBuildOptions
{
    public int Width { get; init; } = ApronSceneGenerator.DefaultWidth;
    public int Height { get; init; } = ApronSceneGenerator.DefaultHeight;
    public int TrainingFrames { get; init; } = 16;
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

public sealed record DemoBuildResult(DemoModel Model, ClassStatistics Statistics, IReadOnlyList<string> Files);

/// <summary>
/// Regenerates the bundled demo (model, descriptor, statistics, frames, held-out debris set) from code alone; the
/// same options always give the same files.
/// </summary>
public static class DemoAssets
{
    public const string ModelFile = "model.onnx";
    public const string DescriptorFile = "descriptor.json";
    public const string StatisticsFile = "statistics.json";
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
        var statistics = MeasureStatistics(model, training);
        string statisticsPath = Path.Combine(folder, StatisticsFile);
        statistics.Save(statisticsPath);
        files.Add(statisticsPath);

        string frames = Path.Combine(folder, FramesFolder);
        Directory.CreateDirectory(frames);
        var demo = ApronSceneSet.Normal(options.DemoFrames, options.DemoSeed, options.Width, options.Height);
        for (int i = 0; i < demo.Count; i++)
        {
            var frame = demo[i];
            string name = $"apron_{i + 1:D2}.png";
            if (i < options.DemoDebrisFrames)
            {
                frame = ApronDebrisPainter.Paint(frame, ApronSceneSet.FrameSeed(options.DemoSeed, i) + 7919, 4).Frame;
                name = $"apron_{i + 1:D2}_debris.png";
            }
            string path = Path.Combine(frames, name);
            DemoPng.SaveRgb(path, frame.Rgb, frame.Width, frame.Height);
            files.Add(path);
        }

        string heldOut = Path.Combine(folder, HeldOutFolder);
        Directory.CreateDirectory(heldOut);
        var set = HeldOut(options.HeldOutFrames, options);
        for (int i = 0; i < set.Count; i++)
        {
            string framePath = Path.Combine(heldOut, $"frame_{i:D3}.png"), maskPath = Path.Combine(heldOut, $"mask_{i:D3}.png");
            DemoPng.SaveRgb(framePath, set[i].Frame.Rgb, options.Width, options.Height);
            DemoPng.SaveGray(maskPath, set[i].AnomalyMask, options.Width, options.Height);
            files.Add(framePath);
            files.Add(maskPath);
        }
        return new DemoBuildResult(model, statistics, files);
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
    /// Max-logit mean and std per predicted class over normal frames. Measured at logit resolution (1/4 of the frame) for
    /// now; once the scoring pipeline upsamples logits to frame size, this should be measured through it.
    /// </summary>
    public static ClassStatistics MeasureStatistics(DemoModel model, IReadOnlyList<ApronFrame> frames)
    {
        int classes = model.ClassCount;
        var n = new long[classes];
        var sum = new double[classes];
        var sumSq = new double[classes];
        foreach (var f in frames)
        {
            var logits = model.Logits(f, out int h, out int w);
            int m = h * w;
            for (int p = 0; p < m; p++)
            {
                int best = 0;
                float max = logits[p];
                for (int c = 1; c < classes; c++)
                    if (logits[c * m + p] > max) { max = logits[c * m + p]; best = c; }
                n[best]++;
                sum[best] += max;
                sumSq[best] += (double)max * max;
            }
        }
        var list = new List<ClassStatistic>(classes);
        for (int c = 0; c < classes; c++)
        {
            double mean = n[c] == 0 ? 0 : sum[c] / n[c];
            double variance = n[c] < 2 ? 0 : Math.Max(0, (sumSq[c] - n[c] * mean * mean) / (n[c] - 1));
            list.Add(new ClassStatistic(ApronClasses.Names[c], n[c], Math.Round(mean, 6), Math.Round(Math.Sqrt(variance), 6)));
        }
        return new ClassStatistics(list);
    }

    private static string Write(string folder, string name, byte[] bytes)
    {
        string path = Path.Combine(folder, name);
        File.WriteAllBytes(path, bytes);
        return path;
    }
}
