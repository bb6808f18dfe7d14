using System.Text.Json;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Calibration;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Service.Reports;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Setup;

/// <summary>No calibration: SML is refused with the fix named; doubts about a result land in the report's warnings.</summary>
[Collection(ConsoleCollection.Name)]
public sealed class UncalibratedModelTests
{
    private static DecodedFrame Frame(int width, int height, int seed = 3)
    {
        using var image = TestImages.Noise(width, height, seed);
        return new FrameDecoder().Decode(TestImages.Png(image));
    }

    [Fact]
    public void SmlWithoutStatisticsIsRefusedNamingCalibrate()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        using var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread);
        Assert.Equal(ScoreMethod.Sml, bundle.Defaults.Method);
        Assert.NotNull(bundle.Warning);
        using var frame = Frame(24, 16);
        string outFolder = s.Dir["out"];
        var e = Assert.Throws<ModelException>(() => new FrameOutput(bundle).Write(frame, "f", outFolder));
        Assert.Equal(ModelErrorCodes.StatisticsMissing, e.Code);
        Assert.Contains("strayspot calibrate", e.Message);
        Assert.False(Directory.Exists(outFolder), "nothing is written for a refused frame");
    }

    [Fact]
    public void ScoreVerbRefusesSmlWithoutCalibrationAndExitsTwo()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        var (code, _, err) = CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["out"], "--threads", "1");
        Assert.Equal(2, code);
        Assert.Contains("statistics-missing", err);
        Assert.Contains("strayspot calibrate", err);
    }

    [Fact]
    public void ThresholdOffTheMethodsScaleIsWarnedInTheReport()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        using var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread);
        using var frame = Frame(24, 16);
        // SML's default threshold 2.0 under MSP (scores −1..−1/3): nothing could ever be flagged.
        var report = new FrameOutput(bundle).Write(frame, "f", s.Dir["out"], bundle.Defaults with { Method = ScoreMethod.Msp });
        var w = Assert.Single(report.Warnings);
        Assert.Equal(ScoringWarnings.ThresholdOutOfRange, w.Code);
        var json = JsonDocument.Parse(File.ReadAllText(Path.Combine(s.Dir["out"], FrameOutput.ReportFile)));
        Assert.Equal(ScoringWarnings.ThresholdOutOfRange, json.RootElement.GetProperty("warnings")[0].GetProperty("code").GetString());

        var fits = new FrameOutput(bundle).Write(frame, "g", s.Dir["out2"], bundle.Defaults with { Method = ScoreMethod.Msp, Threshold = -0.5f });
        Assert.Empty(fits.Warnings);
    }

    [Fact]
    public void FrameFarFromTheCalibratedSizeIsWarned()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 }, width: 24, height: 16);
        s.Calibrate();
        using var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread);
        using (var same = Frame(30, 20))
            Assert.Empty(new FrameOutput(bundle).Write(same, "a", s.Dir["a"]).Warnings);
        using var big = Frame(80, 40);
        var w = Assert.Single(new FrameOutput(bundle).Write(big, "b", s.Dir["b"]).Warnings);
        Assert.Equal(ScoringWarnings.FrameSizeDiffers, w.Code);
        Assert.Contains("24×16", w.Message);
    }

    [Fact]
    public void BareStatisticsFileIsWarnedAsUnbound()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        var artifact = s.Calibrate();
        File.Move(Path.Combine(s.Model, CalibrationArtifact.FileName), Path.Combine(s.Model, "statistics.json"));
        using var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread);
        using var frame = Frame(24, 16);
        var w = Assert.Single(new FrameOutput(bundle).Write(frame, "f", s.Dir["out"]).Warnings);
        Assert.Equal(ScoringWarnings.StatisticsUnbound, w.Code);
    }
}
