using Microsoft.ML.OnnxRuntime;
using Microsoft.ML.OnnxRuntime.Tensors;
using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Demo;

[Collection(DemoCollection.Name)]
public sealed class DemoModelOnnxTests(DemoFixture fixture)
{
    // Reference: ONNX Runtime's own operators evaluate the exported graph; the C# classifier must agree with them.
    [Theory]
    [InlineData(128, 256, false)]
    [InlineData(100, 140, true)]
    [InlineData(512, 1024, true)]
    public void OnnxRuntimeLogitsMatchTheDirectClassifier(int height, int width, bool debris)
    {
        var frame = new ApronSceneGenerator(width, height).Render(4242);
        if (debris) frame = ApronDebrisPainter.Paint(frame, 77, 5).Frame;
        var input = DemoFeatures.ToInput(frame.Rgb, width, height);
        var expected = fixture.Model.Logits(frame, out int h, out int w);

        using var session = new InferenceSession(DemoModelOnnx.ToBytes(fixture.Model));
        var tensor = new DenseTensor<float>(input, [1, 3, height, width]);
        using var results = session.Run([NamedOnnxValue.CreateFromTensor(DemoModelOnnx.InputName, tensor)]);
        var output = results.Single(r => r.Name == DemoModelOnnx.OutputName).AsTensor<float>();

        Assert.Equal([1, ApronClasses.Count, height / 4, width / 4], output.Dimensions.ToArray());
        Assert.Equal(expected.Length, (int)output.Length);
        var actual = output.ToArray();
        double worst = 0;
        for (int i = 0; i < expected.Length; i++) worst = Math.Max(worst, Math.Abs(actual[i] - expected[i]));
        Assert.True(worst <= 1e-4, $"ONNX Runtime and the direct classifier differ by up to {worst:E3} at {height}x{width}.");
        Assert.Equal(h * w * ApronClasses.Count, expected.Length);
    }

    [Fact]
    public void CommittedModelDeclaresDynamicInputAndQuarterResolutionOutput()
    {
        using var session = new InferenceSession(Path.Combine(DemoFixture.CommittedFolder, DemoAssets.ModelFile));
        var input = session.InputMetadata[DemoModelOnnx.InputName];
        Assert.Equal([1, 3, -1, -1], input.Dimensions);
        Assert.Equal(["", "", "height", "width"], input.SymbolicDimensions);
        var output = session.OutputMetadata[DemoModelOnnx.OutputName];
        Assert.Equal(ApronClasses.Count, output.Dimensions[1]);
        Assert.True(new FileInfo(Path.Combine(DemoFixture.CommittedFolder, DemoAssets.ModelFile)).Length < 1_000_000);
    }
}
