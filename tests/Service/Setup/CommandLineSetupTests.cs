using System.Text.Json;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Cli;
using Strayspot.Service.Evaluation;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Setup;

/// <summary>The command line refuses what a newcomer gets wrong, naming the fix.</summary>
[Collection(ConsoleCollection.Name)]
public sealed class CommandLineSetupTests
{
    [Fact]
    public void UnknownOptionIsRefusedNamingTheClosest()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        var (code, _, err) = CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["out"], "--treshold", "3");
        Assert.Equal(2, code);
        Assert.Contains("'--treshold' is not an option of 'score'", err);
        Assert.Contains("Did you mean '--threshold'?", err);
        Assert.DoesNotContain("No such frame", err);
        // A negative value is a value, not an option.
        var (ok, _, err2) = CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["out"], "--method", "msp", "--threshold", "-0.5", "--threads", "1");
        Assert.True(ok == 0, err2);
    }

    [Fact]
    public void ScoreWritesTheLeanArtifactsByDefaultAndTheChosenOnes()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 }, frames: 1);
        var (code, _, err) = CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["lean"], "--method", "msp", "--threshold", "-0.5", "--threads", "1");
        Assert.True(code == 0, err);
        Assert.Equal(["mask.png", "overlay.png", "report.json"], Directory.GetFiles(Path.Combine(s.Dir["lean"], "f00")).Select(Path.GetFileName).Order());
        CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["none"], "--artifacts", "none", "--method", "msp", "--threshold", "-0.5", "--threads", "1");
        Assert.Equal(["report.json"], Directory.GetFiles(Path.Combine(s.Dir["none"], "f00")).Select(Path.GetFileName));
        var (bad, _, err3) = CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["bad"], "--artifacts", "mask,heet", "--method", "msp");
        Assert.Equal(2, bad);
        Assert.Contains("Did you mean 'heat'?", err3);
    }

    [Fact]
    public void OptionsAreNamedAfterTheirJsonFieldsAndRankingCountsRegions()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 }, frames: 1);
        var (code, _, err) = CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["out"], "--method", "msp", "--threshold", "-0.9",
            "--minimum-region-area", "3", "--boundary-iterations", "2", "--kernel-size", "5", "--threads", "1");
        Assert.True(code == 0, err);
        var report = JsonDocument.Parse(File.ReadAllText(Path.Combine(s.Dir["out"], "f00", "report.json"))).RootElement;
        var parameters = report.GetProperty("parameters");
        Assert.Equal(3, parameters.GetProperty("minimumRegionArea").GetInt32());
        Assert.Equal(2, parameters.GetProperty("boundarySuppression").GetProperty("iterations").GetInt32());
        Assert.Equal(5, parameters.GetProperty("smoothing").GetProperty("kernelSize").GetInt32());
        var ranked = JsonDocument.Parse(File.ReadAllText(Path.Combine(s.Dir["out"], "ranking.json"))).RootElement[0];
        Assert.Equal(report.GetProperty("regions").GetArrayLength(), ranked.GetProperty("regionCount").GetInt32());
        Assert.False(ranked.TryGetProperty("regions", out _));
    }

    [Fact]
    public void ModelFileGivenForItsFolderNamesTheFolder()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        var (code, _, err) = CliRun.Capture("score", Path.Combine(s.Model, "model.onnx"), s.Frames, "--out", s.Dir["out"]);
        Assert.Equal(2, code);
        Assert.Contains("is a file; pass the model folder", err);
        Assert.Contains(s.Model, err);
    }

    [Fact]
    public void DescriptorKeyTypoNamesTheKeyTheValidKeysAndTheClosest()
    {
        var e = Assert.Throws<ModelException>(() => ModelDescriptor.Parse(
            """{"name":"m","classes":[{"name":"a","colour":"#ffffff"}],"input":{"valueScal":1},"output":{}}"""));
        Assert.Contains("input.valueScal: unknown key. Did you mean 'valueScale'?", e.Message);
        Assert.Contains("classes[0].colour: unknown key. Did you mean 'color'?", e.Message);
        Assert.Contains("Valid keys of input: tensor, layout, channelOrder, valueScale", e.Message);
        Assert.DoesNotContain(".NET", e.Message);
        Assert.DoesNotContain("Strayspot.", e.Message);

        var wrongType = Assert.Throws<ModelException>(() => ModelDescriptor.Parse("""{"name":"m","classes":[{"name":"a"}],"input":{"valueScale":"255"}}"""));
        Assert.Contains("input.valueScale: wrong kind of value; it takes a number", wrongType.Message);
        Assert.DoesNotContain("System.", wrongType.Message);
    }

    [Fact]
    public void ScoreLogitsRefusesSwappedHeightAndWidthUnlessStretchIsGiven()
    {
        using var dir = new TempFolder();
        string npy = dir["logits.npy"];
        var data = new float[3 * 64 * 128];
        for (int i = 0; i < data.Length; i++) data[i] = (i % 7) * 0.1f;
        Npy.WriteFloat32(npy, data, [3, 64, 128]);
        var options = new Strayspot.Scoring.Pipeline.ScoringOptions { Method = Strayspot.Scoring.Pipeline.ScoreMethod.MaxLogit };
        var e = Assert.Throws<ScoringInputException>(() => ScoreLogitsVerb.Run(npy, null, "256x512", options, dir["a"]));
        Assert.Contains("swapped", e.Message);
        Assert.Equal(ScoringErrorCodes.LogitsAspect, e.Code);
        ScoreLogitsVerb.Run(npy, null, "512x256", options, dir["b"]);
        ScoreLogitsVerb.Run(npy, null, "256x512", options, dir["c"], stretch: true);
        Assert.True(LogitsAspect.Agrees(17, 33, 65, 129)); // stride 4 with rounding
        Assert.True(LogitsAspect.Agrees(1, 1, 20, 40));
    }

    [Fact]
    public void LabelMapsBesideTheMasksGetOneClearLine()
    {
        using var dir = new TempFolder();
        Directory.CreateDirectory(dir["data/frames"]);
        Directory.CreateDirectory(dir["data/masks"]);
        for (int i = 0; i < 3; i++)
        {
            using var img = TestImages.Noise(8, 6, seed: i);
            img.SaveAsPng(dir[$"data/frames/f{i}.png"]);
            using var mask = new Image<L8>(8, 6);
            mask.SaveAsPng(dir[$"data/masks/f{i}.png"]);
            mask.SaveAsPng(dir[$"data/masks/f{i}_labels.png"]);
        }
        var e = Assert.Throws<ScoringInputException>(() => EvaluationDataset.Open(dir["data"]));
        Assert.Contains("labels/<id>.png", e.Message);
        Assert.Contains("1 problem(s)", e.Message);
    }
}

/// <summary>evaluate --write-profile prints the trade-off and refuses a threshold that flags most ordinary pixels unless forced.</summary>
[Collection(ConsoleCollection.Name)]
public sealed class WriteProfileTests
{
    [Fact]
    public void ProfileFlaggingMostOrdinaryPixelsIsRefusedUnlessForced()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        string data = s.WriteDataset();
        // A toy graph's score says next to nothing about debris, so 95% TPR costs most ordinary pixels.
        var (code, stdout, err) = CliRun.Capture("evaluate", s.Model, data, "--out", s.Dir["eval"], "--write-profile", "--threads", "1");
        Assert.Equal(2, code);
        Assert.Contains("trade-off of maxlogit", stdout);
        Assert.Contains("of ordinary pixels", stdout);
        Assert.Contains("profile-flags-too-much", err);
        Assert.Contains("--force-profile", err);
        Assert.False(File.Exists(Path.Combine(s.Model, "profile.json")));
        var metrics = JsonDocument.Parse(File.ReadAllText(Path.Combine(s.Dir["eval"], EvaluationOutputs.JsonFile)));
        Assert.True(metrics.RootElement.GetProperty("tradeOff").GetProperty("flaggedOrdinaryShare").GetDouble() > 0.1);

        var (forced, _, err2) = CliRun.Capture("evaluate", s.Model, data, "--out", s.Dir["eval2"], "--write-profile", "--force-profile", "--threads", "1");
        Assert.True(forced == 0, err2);
        Assert.True(File.Exists(Path.Combine(s.Model, "profile.json")));
    }
}
