namespace Strayspot.Bench;

/// <summary>
/// Logits shaped like a real network's: smooth class fields with regions of a few dozen pixels and up,
/// and a few low-confidence blobs. Pure noise would make every pixel a boundary and flatter the stages.
/// </summary>
public static class SyntheticLogits
{
    public static float[] Make(int channels, int height, int width, int seed)
    {
        var rng = new Random(seed);
        var data = new float[channels * height * width];
        var waves = new (double fx, double fy, double phase, double amp)[channels * 3];
        for (int i = 0; i < waves.Length; i++)
            waves[i] = (rng.NextDouble() * 6 / width, rng.NextDouble() * 6 / height, rng.NextDouble() * Math.Tau, 1 + 2 * rng.NextDouble());
        var blobs = new (double x, double y, double r)[6];
        for (int i = 0; i < blobs.Length; i++)
            blobs[i] = (rng.NextDouble() * width, rng.NextDouble() * height, (0.01 + 0.02 * rng.NextDouble()) * width);
        for (int c = 0; c < channels; c++)
        {
            double bias = rng.NextDouble() * 2;
            for (int y = 0; y < height; y++)
                for (int x = 0; x < width; x++)
                {
                    double v = bias + 6;
                    for (int k = 0; k < 3; k++)
                    {
                        var w = waves[c * 3 + k];
                        v += w.amp * Math.Cos(Math.Tau * (w.fx * x + w.fy * y) + w.phase);
                    }
                    foreach (var b in blobs)
                    {
                        double d2 = ((x - b.x) * (x - b.x) + (y - b.y) * (y - b.y)) / (b.r * b.r);
                        if (d2 < 1) v -= 5 * (1 - d2);
                    }
                    data[(c * height + y) * width + x] = (float)(v + 0.2 * (rng.NextDouble() - 0.5));
                }
        }
        return data;
    }
}
