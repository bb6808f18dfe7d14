using System.CommandLine;
using Google.Protobuf;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Cli;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Setup;

/// <summary><c>inspect</c> reads the graph: normalization inside, a final Softmax, tensor-name hints, the output stride.</summary>
public sealed class InspectGuessTests
{
    // Per-channel constants of the 0..255 pixel range; invented for the test.
    private static readonly float[] ByteMean = [120f, 110f, 100f];
    private static readonly float[] ByteStd = [60f, 55f, 58f];

    private static ModelFacts Inspect(TempFolder dir, TestSegmentationGraph graph)
    {
        File.WriteAllBytes(dir["model.onnx"], graph.Build().ToByteArray());
        return ModelInspector.Inspect(dir["model.onnx"]);
    }

    private static DescriptorGuess Guess(ModelFacts f, string field) => ModelInspector.Guesses(f).Single(g => g.Field == field);

    [Fact]
    public void NormalizationInsideTheGraphProposesScaleOneAndNeutralMeanStd()
    {
        using var dir = new TempFolder();
        var facts = Inspect(dir, new TestSegmentationGraph { ChannelsLast = true, FixedHeight = 16, FixedWidth = 32, InsideMean = ByteMean, InsideStd = ByteStd });
        var scale = Guess(facts, "input.valueScale");
        Assert.Equal("1", scale.Value);
        Assert.True(scale.Decided);
        Assert.Contains("Sub [120, 110, 100]", scale.Reason);
        var d = ModelInspector.StarterDescriptor(facts);
        Assert.Equal((1f, "nhwc", "fixed"), (d.Input.ValueScale, d.Input.Layout, d.Input.Size.Mode));
        Assert.Equal([0f, 0f, 0f], d.Input.Mean);
        Assert.Equal([1f, 1f, 1f], d.Input.Std);

        // 0..1 constants: the graph is fed 0..1.
        using var dir2 = new TempFolder();
        var unit = Inspect(dir2, new TestSegmentationGraph { InsideMean = [0.5f, 0.4f, 0.3f], InsideStd = [0.2f, 0.25f, 0.22f] });
        Assert.Equal("255", Guess(unit, "input.valueScale").Value);
    }

    [Fact]
    public void WithoutNormalizationInsideMeanAndStdAreMarkedUndecided()
    {
        using var dir = new TempFolder();
        var facts = Inspect(dir, new TestSegmentationGraph());
        Assert.False(Guess(facts, "input.mean").Decided);
        Assert.False(Guess(facts, "input.valueScale").Decided);
        Assert.False(Guess(facts, "input.channelOrder").Decided);
    }

    [Fact]
    public void FinalSoftmaxAndBgrNameAreRead()
    {
        using var dir = new TempFolder();
        var facts = Inspect(dir, new TestSegmentationGraph { Softmax = true, InputName = "image_bgr" });
        Assert.Equal("probabilities", Guess(facts, "output.kind").Value);
        Assert.Equal("bgr", Guess(facts, "input.channelOrder").Value);
        var d = ModelInspector.StarterDescriptor(facts);
        Assert.Equal(("probabilities", "bgr"), (d.Output.Kind, d.Input.ChannelOrder));
    }

    [Theory]
    [InlineData(1, 1)]
    [InlineData(4, 4)]
    public void DynamicModelsKeepTheFrameSizeAndPadOnlyToTheMultipleTheGraphNeeds(int stride, int multiple)
    {
        using var dir = new TempFolder();
        var facts = Inspect(dir, new TestSegmentationGraph { Stride = stride });
        Assert.Equal(new SizeProbe.Result(stride, multiple), facts.Probe);
        var d = ModelInspector.StarterDescriptor(facts);
        Assert.Equal("dynamic", d.Input.Size.Mode);
        Assert.Null(d.Input.Size.ResizeSide);
        Assert.Equal(multiple, d.Input.Size.PadMultiple);
    }

    /// <summary>Right result: the inside-normalizing graph with inspect's descriptor scores like the plain export with mean/std in the descriptor.</summary>
    [Fact]
    public void InspectedDescriptorScoresLikeThePlainExport()
    {
        using var dir = new TempFolder();
        var inside = new TestSegmentationGraph { Classes = 4, InsideMean = ByteMean, InsideStd = ByteStd };
        File.WriteAllBytes(Path.Combine(Directory.CreateDirectory(dir["inside"]).FullName, "model.onnx"), inside.Build().ToByteArray());
        ModelInspector.StarterDescriptor(ModelInspector.Inspect(Path.Combine(dir["inside"], "model.onnx")), "inside").Save(Path.Combine(dir["inside"], "descriptor.json"));

        var plain = new TestSegmentationGraph { Classes = 4 };
        plain.WriteFolder(dir["plain"], plain.Descriptor() with
        {
            Classes = Enumerable.Range(0, 4).Select(i => new ClassDescriptor { Name = $"class_{i}" }).ToList(),
            Input = plain.Descriptor().Input with { ValueScale = 1f, Mean = ByteMean, Std = ByteStd },
        });
        using var image = TestImages.Noise(20, 12, seed: 8);
        using var frame = new FrameDecoder().Decode(TestImages.Png(image));
        var options = new ScoringOptions { Method = ScoreMethod.MaxLogit, BoundarySuppression = new() { Enabled = false }, Smoothing = new() { Enabled = false } };
        float[] Score(string folder)
        {
            using var b = ModelBundle.Load(folder, SetupFolder.OneThread);
            return b.Scorer.Score(frame, (s, _) => s.AnomalyScore.ToArray(), options);
        }
        var a = Score(dir["plain"]);
        var c = Score(dir["inside"]);
        for (int i = 0; i < a.Length; i++) Assert.True(Math.Abs(a[i] - c[i]) <= 1e-4f * Math.Max(1, Math.Abs(a[i])), $"pixel {i}: {a[i]} vs {c[i]}");
    }

    [Fact]
    public void VerbPrintsEachGuessWithItsReasonAndMarksUndecided()
    {
        using var dir = new TempFolder();
        File.WriteAllBytes(dir["model.onnx"], new TestSegmentationGraph { Stride = 4 }.Build().ToByteArray());
        var output = new StringWriter();
        int code = new RootCommand { InspectVerb.Create() }.Parse(["inspect", dir["model.onnx"]])
            .Invoke(new InvocationConfiguration { Output = output, Error = new StringWriter() });
        Assert.Equal(0, code);
        string text = output.ToString();
        Assert.Contains("? input.mean", text);
        Assert.Contains("output stride 4", text);
        Assert.Contains("because", text);
    }
}
