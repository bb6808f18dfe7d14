using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Reduction;

/// <summary>
/// The obvious version: upsample every channel into a C×H×W buffer with ONNX Runtime's four-tap bilinear formula,
/// then reduce each pixel in double precision. Test oracle and benchmark baseline; far too slow and memory-hungry
/// for the service.
/// </summary>
internal static class NaiveReduction
{
    public static float[] Upsample(LogitsView logits, int height, int width)
    {
        int c = logits.Channels, h = logits.Height, w = logits.Width;
        var ys = ResampleAxis.Create(h, height, height);
        var xs = ResampleAxis.Create(w, width, width);
        var src = logits.Data.Span;
        var up = new float[(long)c * height * width];
        for (int ch = 0; ch < c; ch++)
        {
            int plane = ch * h * w;
            for (int y = 0; y < height; y++)
            {
                int r1 = plane + ys.Index0[y] * w, r2 = plane + ys.Index1[y] * w;
                float dy2 = ys.Weight0[y], dy1 = ys.Weight1[y];
                int o = (ch * height + y) * width;
                for (int x = 0; x < width; x++)
                {
                    int x1 = xs.Index0[x], x2 = xs.Index1[x];
                    float dx2 = xs.Weight0[x], dx1 = xs.Weight1[x];
                    up[o + x] = dx2 * dy2 * src[r1 + x1] + dx1 * dy2 * src[r1 + x2]
                              + dx2 * dy1 * src[r2 + x1] + dx1 * dy1 * src[r2 + x2];
                }
            }
        }
        return up;
    }

    public static void Reduce(LogitsView logits, int height, int width, ReductionOutputs outputs, double temperature, ReducedMaps into)
    {
        float[] up = Upsample(logits, height, width);
        ReduceUpsampled(up, logits.Channels, height, width, outputs, temperature, into);
    }

    public static void ReduceUpsampled(float[] up, int channels, int height, int width, ReductionOutputs outputs, double temperature, ReducedMaps into)
    {
        into.EnsureSize(width, height, outputs);
        int n = height * width;
        for (int p = 0; p < n; p++)
        {
            int best = 0;
            float max = up[p];
            for (int c = 1; c < channels; c++)
                if (up[(long)c * n + p] > max) { max = up[(long)c * n + p]; best = c; }
            into.ClassIndex[p] = (ushort)best;
            into.MaxLogit[p] = max;
            if (outputs == ReductionOutputs.None) continue;
            double s = 0, t = 0, sT = 0;
            for (int c = 0; c < channels; c++)
            {
                double d = up[(long)c * n + p] - (double)max;
                double e = Math.Exp(d);
                s += e;
                t += e * d;
                sT += Math.Exp(d / temperature);
            }
            if ((outputs & ReductionOutputs.Msp) != 0) into.Msp[p] = (float)(1 / s);
            if ((outputs & ReductionOutputs.Entropy) != 0) into.Entropy[p] = (float)(Math.Log(s) - t / s);
            if ((outputs & ReductionOutputs.Energy) != 0) into.Energy[p] = (float)(-max - temperature * Math.Log(sT));
        }
    }
}
