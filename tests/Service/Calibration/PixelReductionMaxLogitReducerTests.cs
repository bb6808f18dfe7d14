using Strayspot.Scoring.Logits;
using Strayspot.Service.Calibration;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Calibration;

public class PixelReductionMaxLogitReducerTests
{
    [Theory]
    [InlineData(5, 7, 9, 30, 41)]
    [InlineData(3, 4, 4, 4, 4)]
    [InlineData(2, 1, 1, 3, 5)]
    public void AgreesWithTheNaiveBilinearArgmax(int c, int h, int w, int frameH, int frameW)
    {
        var rng = new Random(c * 100 + h);
        var data = new float[c * h * w];
        for (int i = 0; i < data.Length; i++) data[i] = (float)(rng.NextDouble() * 8 - 4);
        var view = new LogitsView(data, c, h, w);
        var fast = new PixelReductionMaxLogitReducer();
        var naive = new NaiveMaxLogitReducer();
        fast.Reduce(view, frameH, frameW);
        naive.Reduce(view, frameH, frameW);
        Assert.Equal(frameH * frameW, fast.MaxLogit.Length);
        int differentClass = 0;
        for (int i = 0; i < frameH * frameW; i++)
        {
            Assert.True(Math.Abs(naive.MaxLogit[i] - fast.MaxLogit[i]) <= 1e-4f, $"pixel {i}: {naive.MaxLogit[i]} vs {fast.MaxLogit[i]}");
            if (naive.ClassIndex[i] != fast.ClassIndex[i]) differentClass++; // only a float near-tie can differ
        }
        Assert.True(differentClass <= frameH * frameW / 100, $"{differentClass} pixels disagree on the class");
    }
}
