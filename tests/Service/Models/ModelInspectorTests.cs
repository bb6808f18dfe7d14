using System.CommandLine;
using System.Security.Cryptography;
using Google.Protobuf;
using Strayspot.Service.Cli;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Models;

public class ModelInspectorTests
{
    [Fact]
    public void ReportsNamesSymbolicShapesOpsetAndHash()
    {
        using var dir = new TempFolder();
        var graph = new TestSegmentationGraph { Classes = 6, Stride = 4, ChannelsLast = true };
        File.WriteAllBytes(dir["m.onnx"], graph.Build().ToByteArray());
        var facts = ModelInspector.Inspect(dir["m.onnx"]);
        Assert.Equal(13, facts.Opset);
        Assert.Equal("strayspot-tests 1", facts.Producer);
        Assert.Equal(Convert.ToHexStringLower(SHA256.HashData(File.ReadAllBytes(dir["m.onnx"]))), facts.Sha256);
        Assert.Equal(new FileInfo(dir["m.onnx"]).Length, facts.FileBytes);
        var input = Assert.Single(facts.Inputs);
        Assert.Equal("pixels", input.Name);
        Assert.Equal("float", input.ElementType);
        Assert.Equal(["1", "height", "width", "3"], input.Shape);
        Assert.Equal(["1", "6", "out_h", "out_w"], Assert.Single(facts.Outputs).Shape);
    }

    [Fact]
    public void A_model_folder_given_to_inspect_is_refused_naming_the_file_inside()
    {
        using var dir = new TempFolder();
        var e = Assert.Throws<ModelException>(() => ModelInspector.Inspect(dir.Path));
        Assert.Equal(ModelErrorCodes.ModelInvalid, e.Code);
        Assert.Contains("is a folder", e.Message);
        Assert.Contains(Path.Combine(dir.Path, "model.onnx"), e.Message);
    }

    [Theory]
    [InlineData(false, null, null)]
    [InlineData(true, null, null)]
    [InlineData(false, 32, 48)]
    public void StarterDescriptorLoadsTheModelItWasGuessedFrom(bool channelsLast, int? h, int? w)
    {
        using var dir = new TempFolder();
        var graph = new TestSegmentationGraph { Classes = 4, ChannelsLast = channelsLast, FixedHeight = h, FixedWidth = w };
        File.WriteAllBytes(dir["model.onnx"], graph.Build().ToByteArray());
        var starter = ModelInspector.StarterDescriptor(ModelInspector.Inspect(dir["model.onnx"]));
        Assert.Equal(channelsLast ? "nhwc" : "nchw", starter.Input.Layout);
        Assert.Equal(["class_0", "class_1", "class_2", "class_3"], starter.Classes.Select(c => c.Name));
        Assert.Equal("scores", starter.Output.Tensor);
        Assert.Empty(starter.Validate());
        starter.Save(dir["descriptor.json"]);
        using var model = SegmentationModel.LoadFolder(dir.Path, new ModelRuntimeOptions { IntraOpThreads = 1 });
        Assert.Equal(4, model.ClassCount);
    }

    [Fact]
    public void VerbPrintsFactsWritesDescriptorAndFailsWithTwoOnGarbage()
    {
        using var dir = new TempFolder();
        File.WriteAllBytes(dir["model.onnx"], new TestSegmentationGraph().Build().ToByteArray());
        var (code, output, _) = Invoke("inspect", dir["model.onnx"], "--write-descriptor", dir["descriptor.json"]);
        Assert.Equal(0, code);
        Assert.Contains("pixels", output);
        Assert.Contains("[1, 3, height, width]", output);
        Assert.True(File.Exists(dir["descriptor.json"]));
        Assert.Empty(ModelDescriptor.Load(dir["descriptor.json"]).Validate());

        File.WriteAllText(dir["junk.onnx"], "definitely not protobuf \u0001\u0002");
        var (bad, _, error) = Invoke("inspect", dir["junk.onnx"]);
        Assert.Equal(2, bad);
        Assert.Contains("model-invalid", error);

        var (missing, _, error2) = Invoke("inspect", dir["absent.onnx"]);
        Assert.Equal(2, missing);
        Assert.Contains("does not exist", error2);
    }

    private static (int Code, string Output, string Error) Invoke(params string[] args)
    {
        var root = new RootCommand { InspectVerb.Create() };
        var output = new StringWriter();
        var error = new StringWriter();
        int code = root.Parse(args).Invoke(new InvocationConfiguration { Output = output, Error = error });
        return (code, output.ToString(), error.ToString());
    }
}
