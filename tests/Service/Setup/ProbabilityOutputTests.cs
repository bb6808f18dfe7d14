using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Calibration;
using Strayspot.Service.Evaluation;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Setup;

/// <summary>
/// A model whose graph ends in Softmax: scoring works from its clamped log-probabilities. The reference is the same
/// network exported the plain way (logits), run through ONNX Runtime's own Softmax in the other graph.
/// </summary>
public sealed class ProbabilityOutputTests
{
    private static readonly ScoringOptions Plain = new()
    {
        BoundarySuppression = new() { Enabled = false },
        Smoothing = new() { Enabled = false },
    };

    private static (float[] Score, ushort[] Class) ScoreMaps(string folder, ScoreMethod method, DecodedFrame frame)
    {
        using var bundle = ModelBundle.Load(folder, SetupFolder.OneThread);
        return bundle.Scorer.Score(frame, (s, _) => (s.AnomalyScore.ToArray(), s.ClassIndex.ToArray()), Plain with { Method = method });
    }

    [Theory]
    [InlineData(ScoreMethod.Msp)]
    [InlineData(ScoreMethod.Entropy)]
    public void SoftmaxExportGivesTheLogitsExportsMapsWithin1e5(ScoreMethod method)
    {
        using var dir = new TempFolder();
        var logits = new TestSegmentationGraph { Classes = 6 };
        var softmax = new TestSegmentationGraph { Classes = 6, Softmax = true };
        string a = logits.WriteFolder(dir["logits"]);
        string b = softmax.WriteFolder(dir["softmax"]);
        using var image = TestImages.Noise(40, 24, seed: 5);
        using var frame = new FrameDecoder().Decode(TestImages.Png(image));

        var (expected, expectedClass) = ScoreMaps(a, method, frame);
        var (actual, actualClass) = ScoreMaps(b, method, frame);
        Assert.Equal(expectedClass, actualClass);
        double worst = 0;
        for (int i = 0; i < expected.Length; i++) worst = Math.Max(worst, Math.Abs(expected[i] - actual[i]));
        Assert.True(worst <= 1e-5, $"largest difference {worst}");
        // Not softmax applied twice: with 6 classes that would squeeze MSP under 0.35.
        if (method == ScoreMethod.Msp) Assert.True(-actual.Min() > 0.35f, $"highest MSP {-actual.Min()}");
    }

    [Theory]
    [InlineData("maxlogit")]
    [InlineData("energy")]
    [InlineData("sml")]
    public void MethodsThatNeedLogitsAreRefusedWithTheFix(string method)
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3, Softmax = true });
        using var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread);
        var options = bundle.Defaults with { Method = Strayspot.Service.Cli.ScoringOptionsBinding.ParseMethod(method) };
        var e = Assert.Throws<ModelException>(() => bundle.EnsureCanScore(options));
        Assert.Equal(ModelErrorCodes.MethodNeedsLogits, e.Code);
        Assert.Contains("--method msp", e.Message);
        // The same refusal reaches the frame path itself, before any file is written.
        using var image = TestImages.Noise(24, 16, seed: 1);
        using var frame = new FrameDecoder().Decode(TestImages.Png(image));
        string outFolder = s.Dir["out"];
        Assert.Throws<ModelException>(() => new FrameOutput(bundle).Write(frame, "f", outFolder, options));
        Assert.False(Directory.Exists(outFolder));
    }

    [Fact]
    public void CalibratingAProbabilitiesModelIsRefused()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3, Softmax = true });
        var e = Assert.Throws<ModelException>(() => s.Calibrate());
        Assert.Equal(ModelErrorCodes.MethodNeedsLogits, e.Code);
    }

    [Fact]
    public void LogitsDeclaredAsProbabilitiesAreRefused()
    {
        var graph = new TestSegmentationGraph { Classes = 3 };
        using var s = new SetupFolder(graph, graph.Descriptor() with { Output = new OutputDescriptor { Tensor = graph.OutputName, Kind = "probabilities" } });
        using var bundle = ModelBundle.Load(s.Model, SetupFolder.OneThread);
        using var image = TestImages.Noise(24, 16, seed: 2);
        using var frame = new FrameDecoder().Decode(TestImages.Png(image));
        var e = Assert.Throws<ScoringInputException>(() => bundle.Scorer.Score(frame, (_, _) => 0, Plain with { Method = ScoreMethod.Msp }));
        Assert.Contains("output.kind", e.Message);
    }

    [Fact]
    public void EvaluationMeasuresOnlyMspAndEntropyForProbabilities()
    {
        using var s = new SetupFolder(new TestSegmentationGraph { Classes = 3, Softmax = true });
        string data = s.WriteDataset();
        var report = Evaluator.Run(s.Model, data, s.Dir["eval"], new EvaluationSettings(), runtime: SetupFolder.OneThread);
        Assert.Equal(["msp", "entropy"], report.Methods.Select(m => m.Method));
        Assert.Equal("msp", report.OperatingPoint.Method);
        Assert.Contains(report.Notes, n => n.Contains("probabilities"));
    }
}
