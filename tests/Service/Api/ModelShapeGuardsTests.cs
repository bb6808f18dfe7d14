using SixLabors.ImageSharp;
using System.Net;
using System.Text.Json;
using Google.Protobuf;
using Onnx;
using Strayspot.Service.Models;
using Strayspot.Tests.Service.Setup;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Api;

/// <summary>
/// Models whose shapes do not fit what a frame becomes, on a real Kestrel: <c>strip</c> scales a frame's shortest
/// side to 64 (a 20000×1 frame would become a 1.28-million-wide input), <c>swapped</c> ends in a transpose of height
/// and width, <c>softmax</c> ends in a softmax but its descriptor says logits.
/// </summary>
public sealed class ModelShapeService : IAsyncLifetime
{
    public KestrelService Service { get; private set; } = null!;

    public async Task InitializeAsync()
    {
        Service = await KestrelService.StartAsync(m =>
        {
            var plain = new TestSegmentationGraph { Classes = 3 };
            plain.WriteFolder(Path.Combine(m, "strip"), plain.Descriptor(new SizePolicy { Mode = "dynamic", ResizeSide = "shortest", SideLength = 64 }));
            ModelShapeGraphs.Swapped(Path.Combine(m, "swapped"));
            var soft = new TestSegmentationGraph { Classes = 3, Softmax = true };
            soft.WriteFolder(Path.Combine(m, "softmax"), soft.Descriptor() with { Output = new OutputDescriptor { Tensor = soft.OutputName, Kind = "logits" } });
            foreach (string name in new[] { "strip", "swapped", "softmax" })
                File.WriteAllText(Path.Combine(m, name, "profile.json"), """{"method":"maxlogit","threshold":0}""");
        }, unusable: ["softmax"]);
    }

    public async Task DisposeAsync() => await Service.DisposeAsync();
}

public static class ModelShapeGraphs
{
    /// <summary>The tiny 3-class graph with a transpose of height and width after its logits: [1,3,W,H].</summary>
    public static string Swapped(string folder)
    {
        var graph = new TestSegmentationGraph { Classes = 3, OutputName = "raw" };
        var model = graph.Build();
        model.Graph.Output.Clear();
        var t = new NodeProto { OpType = "Transpose", Name = "swap", Input = { "raw" }, Output = { "scores" } };
        t.Attribute.Add(new AttributeProto { Name = "perm", Type = AttributeProto.Types.AttributeType.Ints, Ints = { 0, 1, 3, 2 } });
        model.Graph.Node.Add(t);
        var shape = new TensorShapeProto();
        shape.Dim.Add(new TensorShapeProto.Types.Dimension { DimValue = 1 });
        shape.Dim.Add(new TensorShapeProto.Types.Dimension { DimValue = 3 });
        shape.Dim.Add(new TensorShapeProto.Types.Dimension { DimParam = "w" });
        shape.Dim.Add(new TensorShapeProto.Types.Dimension { DimParam = "h" });
        model.Graph.Output.Add(new ValueInfoProto
        {
            Name = "scores",
            Type = new TypeProto { TensorType = new TypeProto.Types.Tensor { ElemType = (int)TensorProto.Types.DataType.Float, Shape = shape } },
        });
        Directory.CreateDirectory(folder);
        File.WriteAllBytes(Path.Combine(folder, SegmentationModel.ModelFileName), model.ToByteArray());
        (graph.Descriptor() with { Output = new OutputDescriptor { Tensor = "scores" } }).Save(Path.Combine(folder, ModelDescriptor.FileName));
        return folder;
    }
}

public class ModelShapeGuardsTests(ModelShapeService fixture) : IClassFixture<ModelShapeService>
{
    private HttpClient Client => fixture.Service.Client;

    private async Task<(HttpStatusCode Status, string Code, string Body)> PostFrame(string model, byte[] png)
    {
        var r = await Client.PostAsync($"/v1/models/{model}/frames", SetupGuardsApiTests.Form("frame", png));
        string body = await r.Content.ReadAsStringAsync();
        string code = r.Content.Headers.ContentType?.MediaType == "application/problem+json"
            ? JsonDocument.Parse(body).RootElement.GetProperty("code").GetString()! : "";
        return (r.StatusCode, code, body);
    }

    [Fact]
    public async Task A_strip_frame_that_would_become_a_huge_network_input_is_413_frame_too_large()
    {
        var (status, code, body) = await PostFrame("strip", TestImages.Png(TestImages.Gradient(20000, 1)));
        Assert.True(status == HttpStatusCode.RequestEntityTooLarge, body);
        Assert.Equal("frame-too-large", code);
        Assert.Contains("resizeSide shortest 64", body);
        // An ordinary frame on the same model still scores.
        Assert.Equal(HttpStatusCode.OK, (await PostFrame("strip", TestImages.Png(TestImages.Gradient(40, 24)))).Status);
    }

    [Fact]
    public async Task An_output_with_height_and_width_swapped_is_refused_not_stretched()
    {
        var (status, code, body) = await PostFrame("swapped", TestImages.Png(TestImages.Gradient(40, 24)));
        Assert.True(status == HttpStatusCode.ServiceUnavailable, body);
        Assert.Equal(ModelErrorCodes.ModelOutputMismatch, code);
        Assert.Contains("swapped", body);
        // A square frame cannot show the swap, and its output maps right: it scores.
        Assert.Equal(HttpStatusCode.OK, (await PostFrame("swapped", TestImages.Png(TestImages.Gradient(32, 32)))).Status);
    }

    [Fact]
    public async Task A_softmax_output_declared_as_logits_is_refused_naming_output_kind()
    {
        var (status, code, body) = await PostFrame("softmax", TestImages.Png(TestImages.Gradient(40, 24)));
        Assert.True((int)status >= 400 && (int)status < 600 && status != HttpStatusCode.InternalServerError, body);
        Assert.Equal(ModelErrorCodes.ModelOutputMismatch, code);
        Assert.Contains("output.kind", body);
        // The model list says so too, rather than calling it usable.
        var listed = JsonDocument.Parse(await Client.GetStringAsync("/v1/models")).RootElement.GetProperty("models")
            .EnumerateArray().Single(m => m.GetProperty("name").GetString() == "softmax");
        Assert.False(listed.GetProperty("usable").GetBoolean());
        Assert.Contains("output.kind", listed.GetProperty("error").GetString());
        var details = JsonDocument.Parse(await Client.GetStringAsync("/v1/models/softmax")).RootElement;
        Assert.False(details.GetProperty("usable").GetBoolean());
    }
}

/// <summary>The command line refuses descriptors whose sizes would overflow the network input, and strip frames.</summary>
[Collection(ConsoleCollection.Name)]
public sealed class ModelShapeCliTests
{
    [Theory]
    [InlineData("fixed", 60000, 60000, null, 1, "input.size")]
    [InlineData("dynamic", null, null, 2_000_000_000, 1, "input.size.sideLength")]
    [InlineData("dynamic", null, null, null, 1_000_000_000, "input.size.padMultiple")]
    public void A_descriptor_whose_input_size_overflows_is_refused_with_exit_2(string mode, int? height, int? width, int? side, int pad, string field)
    {
        var graph = new TestSegmentationGraph { Classes = 2 };
        var size = new SizePolicy { Mode = mode, Height = height, Width = width, ResizeSide = side is null ? null : "longest", SideLength = side, PadMultiple = pad };
        using var s = new SetupFolder(graph, graph.Descriptor(size), frames: 1);
        var (exit, _, err) = CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["out"], "--method", "msp", "--threshold", "-0.5", "--threads", "1");
        Assert.True(exit == 2, err);
        Assert.Contains("descriptor-invalid", err);
        Assert.Contains(field, err);
    }

    [Fact]
    public void A_strip_frame_on_a_shortest_side_model_is_refused_with_exit_2()
    {
        var graph = new TestSegmentationGraph { Classes = 2 };
        using var s = new SetupFolder(graph, graph.Descriptor(new SizePolicy { Mode = "dynamic", ResizeSide = "shortest", SideLength = 512 }), frames: 0);
        TestImages.Gradient(20000, 1).Save(Path.Combine(s.Frames, "strip.png"));
        var (exit, _, err) = CliRun.Capture("score", s.Model, s.Frames, "--out", s.Dir["out"], "--method", "msp", "--threshold", "-0.5", "--threads", "1");
        Assert.True(exit == 2, err);
        Assert.Contains("frame-too-large", err);
    }
}
