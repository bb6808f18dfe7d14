using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Reduction;

namespace Strayspot.Tests.Scoring.Reduction;

/// <summary>Outside reference: ONNX Runtime's Resize operator (linear, half_pixel), see <see cref="OnnxResizeReference"/>.</summary>
public class ReductionAgainstOnnxRuntimeTests
{
    public static TheoryData<int, int, int, int, int> Sizes => new()
    {
        { 5, 8, 16, 32, 64 },      // 4× up
        { 4, 37, 53, 100, 131 },   // non-integer ratio
        { 3, 20, 30, 20, 30 },     // equal sizes
        { 6, 1, 1, 5, 7 },         // a single source pixel
        { 3, 40, 50, 17, 23 },     // shrinking, no antialias
        { 2, 10, 40, 25, 13 },     // up in y, down in x
        { 19, 16, 32, 64, 128 },   // the common class count, 4× up
        { 7, 3, 5, 3, 5 },         // equal sizes narrower than one vector
    };

    internal static float[] RandomLogits(int n, int seed, float scale = 8f)
    {
        var rng = new Random(seed);
        var a = new float[n];
        for (int i = 0; i < a.Length; i++) a[i] = (float)(rng.NextDouble() * 2 - 1) * scale;
        return a;
    }

    [Theory]
    [MemberData(nameof(Sizes))]
    public void Naive_upsampling_matches_OnnxRuntime_Resize(int c, int h, int w, int outH, int outW)
    {
        var logits = RandomLogits(c * h * w, seed: c * 1000 + h);
        var ort = OnnxResizeReference.Resize(logits, c, h, w, outH, outW);
        var ours = NaiveReduction.Upsample(new LogitsView(logits, c, h, w), outH, outW);
        Assert.Equal(ort.Length, ours.Length);
        float worst = 0;
        for (int i = 0; i < ort.Length; i++) worst = Math.Max(worst, Math.Abs(ort[i] - ours[i]));
        Assert.True(worst <= 1e-5f, $"max |ORT − naive| = {worst}");
    }

    [Theory]
    [MemberData(nameof(Sizes))]
    public void Fused_class_and_max_logit_match_argmax_of_OnnxRuntime_Resize(int c, int h, int w, int outH, int outW)
    {
        var logits = RandomLogits(c * h * w, seed: c * 7 + w);
        var ort = OnnxResizeReference.Resize(logits, c, h, w, outH, outW);
        var maps = new ReducedMaps();
        new PixelReduction().Reduce(new LogitsView(logits, c, h, w), outH, outW, maps);

        int n = outH * outW;
        for (int p = 0; p < n; p++)
        {
            int best = 0;
            float max = ort[p], second = float.NegativeInfinity;
            for (int k = 1; k < c; k++)
            {
                float v = ort[k * n + p];
                if (v > max) { second = max; max = v; best = k; }
                else if (v > second) second = v;
            }
            Assert.True(Math.Abs(maps.MaxLogit[p] - max) <= 1e-5f, $"pixel {p}: max logit {maps.MaxLogit[p]} vs ORT {max}");
            if (max - second >= 1e-5f)
                Assert.True(best == maps.ClassIndex[p], $"pixel {p}: class {maps.ClassIndex[p]} vs ORT {best}");
        }
    }
}
