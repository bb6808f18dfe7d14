using Strayspot.Service.Cli;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;
using Strayspot.Tests.Service.Demo;
using Strayspot.Tests.Support;
using Xunit.Abstractions;

namespace Strayspot.Tests.Service.Setup;

/// <summary>
/// check-input on a trained model: the committed demo network with one of its own frames. A toy graph with made-up
/// weights is no use here, since its confidence says nothing about how it was trained.
/// </summary>
public sealed class InputCheckTests(ITestOutputHelper output)
{
    private InputCheckResult Check(Func<InputDescriptor, InputDescriptor> edit)
    {
        using var dir = new TempFolder();
        string committed = DemoFixture.CommittedFolder;
        File.Copy(Path.Combine(committed, SegmentationModel.ModelFileName), dir["model.onnx"]);
        var d = ModelDescriptor.Load(Path.Combine(committed, ModelDescriptor.FileName));
        (d with { Input = edit(d.Input) }).Save(dir["descriptor.json"]);
        using var model = SegmentationModel.LoadFolder(dir.Path, SetupFolder.OneThread);
        using var frame = new FrameDecoder().DecodeFile(Path.Combine(committed, "frames", "apron_03.png"));
        var r = InputCheck.Run(model, [frame]);
        var text = new StringWriter();
        CheckInputVerb.Print(r, model.Descriptor, text);
        output.WriteLine(text.ToString());
        Assert.Contains("rule of thumb", text.ToString());
        Assert.All(r.Variants, v => Assert.Equal(1.0, v.ClassShares.Sum(), 6));
        return r;
    }

    [Fact]
    public void DescriptorAsTrainedGetsNoWarning()
    {
        var r = Check(i => i);
        Assert.Equal(["as written", "valueScale 1", "channelOrder bgr", "normalization on (the frames' own mean and std)"], r.Variants.Select(v => v.Variant.Name));
        Assert.Empty(r.Warnings);
    }

    [Fact]
    public void WrongValueScaleIsWarnedAsLessConfidentAndCollapsed()
    {
        var r = Check(i => i with { ValueScale = 1f });
        Assert.Contains(r.Warnings, w => w.Contains("'valueScale 255'"));
        Assert.Contains(r.Warnings, w => w.Contains("collapsed"));
    }

    [Fact]
    public void SwappedChannelOrderIsWarned()
    {
        var r = Check(i => i with { ChannelOrder = "bgr" });
        Assert.Contains(r.Warnings, w => w.Contains("'channelOrder rgb'"));
    }
}
