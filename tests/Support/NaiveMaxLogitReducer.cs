using Strayspot.Scoring.Logits;
using Strayspot.Service.Calibration;

namespace Strayspot.Tests.Support;

/// <summary>
/// Slow, obvious reduction for tests: bilinear upsampling with pixel centres aligned (clamped at the edges),
/// then argmax with the lowest index winning ties.
/// </summary>
public sealed class NaiveMaxLogitReducer : IMaxLogitReducer
{
    private float[] _max = [];
    private ushort[] _cls = [];

    public ReadOnlySpan<float> MaxLogit => _max;
    public ReadOnlySpan<ushort> ClassIndex => _cls;

    public void Reduce(LogitsView logits, int frameHeight, int frameWidth)
    {
        _max = new float[frameHeight * frameWidth];
        _cls = new ushort[frameHeight * frameWidth];
        for (int y = 0; y < frameHeight; y++)
        {
            var (y0, y1, wy) = Axis(y, frameHeight, logits.Height);
            for (int x = 0; x < frameWidth; x++)
            {
                var (x0, x1, wx) = Axis(x, frameWidth, logits.Width);
                float best = float.NegativeInfinity; int arg = 0;
                for (int c = 0; c < logits.Channels; c++)
                {
                    var r0 = logits.Row(c, y0); var r1 = logits.Row(c, y1);
                    float top = r0[x0] + (r0[x1] - r0[x0]) * wx, bottom = r1[x0] + (r1[x1] - r1[x0]) * wx;
                    float v = top + (bottom - top) * wy;
                    if (v > best) { best = v; arg = c; }
                }
                _max[y * frameWidth + x] = best;
                _cls[y * frameWidth + x] = (ushort)arg;
            }
        }
    }

    private static (int, int, float) Axis(int i, int outSize, int inSize)
    {
        double f = (i + 0.5) * inSize / outSize - 0.5;
        if (f < 0) f = 0;
        int a = Math.Min((int)f, inSize - 1);
        int b = Math.Min(a + 1, inSize - 1);
        return (a, b, a == inSize - 1 ? 0f : (float)(f - a));
    }
}
