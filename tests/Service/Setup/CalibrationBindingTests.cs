using System.Text.Json.Nodes;
using Strayspot.Service.Calibration;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Setup;

/// <summary>A calibration is bound to the weights, every preprocessing field, the output and the class names.</summary>
public sealed class CalibrationBindingTests
{
    [Fact]
    public void CalibrationRecordsPreprocessingClassNamesAndFrameSize()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 }, width: 24, height: 16);
        var artifact = s.Calibrate();
        Assert.NotNull(artifact.MeasuredWith);
        Assert.Equal(["c0", "c1", "c2"], artifact.MeasuredWith!.ClassNames);
        Assert.Equal(new FrameSize(24, 16), artifact.MeasuredWith.FrameSize);
        using var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread);
        Assert.NotNull(bundle.Calibration);
    }

    public static TheoryData<string, string> Edits => new()
    {
        { "mean", "input.mean" },
        { "std", "input.std" },
        { "valueScale", "input.valueScale" },
        { "channelOrder", "input.channelOrder" },
        { "padMultiple", "input.size.padMultiple" },
        { "className", "classes[1].name" },
    };

    /// <summary>The path every newcomer takes: inspect → calibrate → fix the descriptor → score. The stale statistics are refused.</summary>
    [Theory]
    [MemberData(nameof(Edits))]
    public void ChangedDescriptorRefusesTheCalibrationNamingTheField(string edit, string field)
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        s.Calibrate();
        var d = ModelDescriptor.Load(s.DescriptorPath);
        d = edit switch
        {
            "mean" => d with { Input = d.Input with { Mean = [0.5f, 0.5f, 0.5f] } },
            "std" => d with { Input = d.Input with { Std = [0.2f, 0.2f, 0.2f] } },
            "valueScale" => d with { Input = d.Input with { ValueScale = 1f } },
            "channelOrder" => d with { Input = d.Input with { ChannelOrder = "bgr" } },
            "padMultiple" => d with { Input = d.Input with { Size = d.Input.Size with { PadMultiple = 8 } } },
            _ => d with { Classes = [d.Classes[0], d.Classes[1] with { Name = "renamed" }, d.Classes[2]] },
        };
        d.Save(s.DescriptorPath);
        var e = Assert.Throws<ModelException>(() => ModelBundle.Load(s.Model, SetupFolder.OneThread));
        Assert.Equal(ModelErrorCodes.CalibrationModelMismatch, e.Code);
        Assert.Contains(field + ":", e.Message);
        Assert.Contains("strayspot calibrate", e.Message);
        // The service's catalog applies the same rule.
        var entry = Strayspot.Service.Hosting.ModelCatalog.LoadEntry(s.Model);
        Assert.False(entry.IsUsable);
        Assert.Contains(field + ":", entry.Error);
    }

    [Fact]
    public void ColourAndDescriptionChangesKeepTheCalibration()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        s.Calibrate();
        var d = ModelDescriptor.Load(s.DescriptorPath);
        d = d with { Description = "edited", Classes = [d.Classes[0] with { Color = "#123456", Surface = true }, d.Classes[1], d.Classes[2]] };
        d.Save(s.DescriptorPath);
        using var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread);
        Assert.NotNull(bundle.Statistics);
    }

    [Fact]
    public void OlderCalibrationWithoutBindingIsJudgedByItsDescriptorHash()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3 });
        s.Calibrate();
        string path = Path.Combine(s.Model, CalibrationArtifact.FileName);
        var json = JsonNode.Parse(File.ReadAllText(path))!.AsObject();
        json.Remove("measuredWith");
        File.WriteAllText(path, json.ToJsonString());
        using (var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread))
            Assert.NotNull(bundle.Statistics);

        var d = ModelDescriptor.Load(s.DescriptorPath);
        (d with { Input = d.Input with { Mean = [0.4f, 0.4f, 0.4f] } }).Save(s.DescriptorPath);
        var e = Assert.Throws<ModelException>(() => ModelBundle.Load(s.Model, SetupFolder.OneThread));
        Assert.Equal(ModelErrorCodes.CalibrationModelMismatch, e.Code);
        Assert.Contains("predates", e.Message);
    }
}
