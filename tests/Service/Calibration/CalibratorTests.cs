using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Calibration;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Calibration;

public class CalibratorTests
{
    private static readonly ModelRuntimeOptions OneThread = new() { IntraOpThreads = 1 };

    private static (TempFolder Dir, string ModelFolder, string Frames) Setup(int frames = 7, int classes = 3)
    {
        var dir = new TempFolder();
        string model = Path.Combine(dir.Path, "model");
        var graph = new TestSegmentationGraph { Classes = classes, Stride = 4 };
        graph.WriteFolder(model, graph.Descriptor(new SizePolicy { Mode = "dynamic", ResizeSide = "longest", SideLength = 24, PadMultiple = 8 }));
        string folder = Path.Combine(dir.Path, "frames");
        Directory.CreateDirectory(folder);
        for (int i = 0; i < frames; i++)
        {
            using var img = TestImages.Noise(20 + 3 * i, 14 + i, seed: 40 + i);
            img.SaveAsPng(Path.Combine(folder, $"f{i:D2}.png"));
        }
        return (dir, model, folder);
    }

    private static readonly ParallelSettings OneThreadEach = new() { IntraOpThreads = 1 };

    private static LocalModel Open(string folder) => LocalModel.Open(ModelVersion.ReadForCalibration(folder), OneThreadEach);

    private static Calibrator Make(LocalModel model, CalibrationOptions options) =>
        new(model.Runner, model.Lease, new FrameDecoder(), () => new NaiveMaxLogitReducer(), options);

    [Fact]
    public void ResumedRunEqualsUnbrokenRunExactly()
    {
        var (dir, modelFolder, framesFolder) = Setup();
        using var _ = dir;
        using var local = Open(modelFolder);
        var model = local.Lease.Session;
        var frames = Calibrator.ListFrames(framesFolder);

        var unbroken = Make(local, new CalibrationOptions { CheckpointEvery = 0, Workers = 2, MinimumCount = 1 }).Run(frames, dir["unbroken.json"])!;

        string outPath = dir["resumed.json"];
        var killed = Make(local, new CalibrationOptions { CheckpointEvery = 2, Workers = 2, MinimumCount = 1, StopAfterFrames = 3 }).Run(frames, outPath);
        Assert.Null(killed);
        Assert.False(File.Exists(outPath));
        Assert.True(File.Exists(outPath + ".checkpoint.json"));
        var resumed = Make(local, new CalibrationOptions { CheckpointEvery = 2, Workers = 2, MinimumCount = 1 }).Run(frames, outPath)!;

        Assert.Equal(unbroken.Classes, resumed.Classes); // bit-identical doubles
        Assert.Equal(7, resumed.FrameCount);
        Assert.False(File.Exists(outPath + ".checkpoint.json"));
        Assert.Equal(unbroken.Classes, CalibrationArtifact.Load(outPath).Classes);
    }

    [Fact]
    public void StatisticsEqualATwoPassComputationOverAllFramePixels()
    {
        var (dir, modelFolder, framesFolder) = Setup(frames: 4);
        using var _ = dir;
        using var local = Open(modelFolder);
        var model = local.Lease.Session;
        var frames = Calibrator.ListFrames(framesFolder);
        var artifact = Make(local, new CalibrationOptions { CheckpointEvery = 3, Workers = 2, MinimumCount = 1 }).Run(frames, dir["c.json"])!;

        // Reference: each frame separately, every pixel of every frame listed, then plain two-pass float64.
        var values = new List<float>[model.ClassCount];
        for (int c = 0; c < values.Length; c++) values[c] = [];
        var decoder = new FrameDecoder();
        var prep = new FramePreprocessor(model.Descriptor.Input);
        foreach (var f in frames)
        {
            using var frame = decoder.DecodeFile(f);
            var input = prep.Prepare(frame);
            using var lease = model.Run(input);
            float[]? scratch = null;
            var reducer = new NaiveMaxLogitReducer();
            reducer.Reduce(input.Box.CropToContent(lease.View, ref scratch), frame.Height, frame.Width);
            Assert.Equal(frame.Width * frame.Height, reducer.MaxLogit.Length);
            for (int i = 0; i < reducer.MaxLogit.Length; i++) values[reducer.ClassIndex[i]].Add(reducer.MaxLogit[i]);
        }
        Assert.Equal(frames.Sum(f => { using var fr = decoder.DecodeFile(f); return (long)fr.Width * fr.Height; }),
            artifact.Classes.Sum(c => c.Count));
        for (int c = 0; c < values.Length; c++)
        {
            Assert.Equal(values[c].Count, artifact.Classes[c].Count);
            if (values[c].Count == 0) continue;
            double mean = values[c].Sum(v => (double)v) / values[c].Count;
            double std = Math.Sqrt(values[c].Sum(v => (v - mean) * (v - mean)) / values[c].Count);
            Assert.True(Math.Abs(mean - artifact.Classes[c].Mean) <= 1e-9 * Math.Abs(mean), $"class {c} mean");
            Assert.True(Math.Abs(std - artifact.Classes[c].Std) <= 1e-9 * Math.Abs(std), $"class {c} std");
        }
    }

    [Fact]
    public void ArtifactIsAStatisticsFileAndRecordsProvenance()
    {
        var (dir, modelFolder, framesFolder) = Setup(frames: 2, classes: 4);
        using var _ = dir;
        using var local = Open(modelFolder);
        var model = local.Lease.Session;
        var artifact = Make(local, new CalibrationOptions { MinimumCount = 1_000_000 }).Run(Calibrator.ListFrames(framesFolder), dir["cal.json"])!;
        Assert.Equal(model.ModelSha256, artifact.ModelSha256);
        Assert.Equal(64, artifact.DescriptorSha256.Length);
        Assert.Equal(["c0", "c1", "c2", "c3"], artifact.FallbackClasses); // none reaches a million pixels
        var stats = ClassStatistics.Load(dir["cal.json"]);
        Assert.Equal(artifact.Classes, stats.Classes);
        Assert.Equal(1_000_000, stats.MinimumCount);
    }

    [Fact]
    public void CalibrationOfAnotherModelIsRefusedNamingBothHashes()
    {
        var (dir, modelFolder, framesFolder) = Setup(frames: 1);
        using var _ = dir;
        CalibrationArtifact artifact;
        using (var local = Open(modelFolder))
            artifact = Make(local, new CalibrationOptions()).Run(Calibrator.ListFrames(framesFolder), dir["cal.json"])!;
        // Same shape, other weights.
        string other = Path.Combine(dir.Path, "other");
        var g = new TestSegmentationGraph { Classes = 3, Stride = 2 };
        g.WriteFolder(other);
        using var otherModel = SegmentationModel.LoadFolder(other, OneThread);
        var e = Assert.Throws<ModelException>(() => CalibrationArtifact.LoadFor(otherModel, dir["cal.json"]));
        Assert.Equal(ModelErrorCodes.CalibrationModelMismatch, e.Code);
        Assert.Contains(artifact.ModelSha256, e.Message);
        Assert.Contains(otherModel.ModelSha256, e.Message);
    }

    [Fact]
    public void ABadFrameFailsTheRunWithoutAPartialArtifact()
    {
        var (dir, modelFolder, framesFolder) = Setup(frames: 3);
        using var _ = dir;
        File.WriteAllBytes(Path.Combine(framesFolder, "f01.png"), [0x89, 0x50, 0x4E, 0x47, 1, 2, 3]);
        using var local = Open(modelFolder);
        var e = Assert.Throws<Strayspot.Service.Frames.FrameException>(() =>
            Make(local, new CalibrationOptions { CheckpointEvery = 0 }).Run(Calibrator.ListFrames(framesFolder), dir["cal.json"]));
        Assert.True(e.Code is Strayspot.Service.Frames.FrameErrorCodes.Corrupt or Strayspot.Service.Frames.FrameErrorCodes.Format, e.Code);
        Assert.Contains("f01.png", e.Message);
        Assert.False(File.Exists(dir["cal.json"]));
        Assert.Empty(Directory.EnumerateFiles(dir.Path, "*.tmp"));
    }

    [Fact]
    public void LabelFilterCountsOnlyCorrectlyPredictedPixels()
    {
        var (dir, modelFolder, framesFolder) = Setup(frames: 2);
        using var _ = dir;
        using var local = Open(modelFolder);
        var model = local.Lease.Session;
        var frames = Calibrator.ListFrames(framesFolder);
        var unfiltered = Make(local, new CalibrationOptions()).Run(frames, dir["all.json"])!;
        // Labels equal to the prediction everywhere except an ignored top row: counts drop by exactly that row.
        string labels = Path.Combine(dir.Path, "labels");
        Directory.CreateDirectory(labels);
        var decoder = new FrameDecoder();
        var prep = new FramePreprocessor(model.Descriptor.Input);
        long ignored = 0;
        foreach (var f in frames)
        {
            using var frame = decoder.DecodeFile(f);
            var input = prep.Prepare(frame);
            using var lease = model.Run(input);
            float[]? scratch = null;
            var r = new NaiveMaxLogitReducer();
            r.Reduce(input.Box.CropToContent(lease.View, ref scratch), frame.Height, frame.Width);
            using var label = new Image<L8>(frame.Width, frame.Height);
            for (int y = 0; y < frame.Height; y++)
                for (int x = 0; x < frame.Width; x++)
                    label[x, y] = new L8(y == 0 ? (byte)255 : (byte)r.ClassIndex[y * frame.Width + x]);
            label.SaveAsPng(Path.Combine(labels, Path.GetFileNameWithoutExtension(f) + ".png"));
            ignored += frame.Width;
        }
        var filtered = Make(local, new CalibrationOptions { LabelsFolder = labels, IgnoreLabel = 255 }).Run(frames, dir["lab.json"])!;
        Assert.True(filtered.LabelFiltered);
        Assert.Equal(unfiltered.Classes.Sum(c => c.Count) - ignored, filtered.Classes.Sum(c => c.Count));
    }
}
