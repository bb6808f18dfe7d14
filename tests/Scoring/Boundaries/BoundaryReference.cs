using Strayspot.Scoring.Pipeline;

namespace Strayspot.Tests.Scoring.Boundaries;

/// <summary>Boundary suppression straight from its definition, slow on purpose: the yardstick of the fast stage.</summary>
internal static class BoundaryReference
{
    public static bool IsBoundary(ushort[] cls, int w, int h, int x, int y, int r)
    {
        for (int qy = Math.Max(0, y - r); qy <= Math.Min(h - 1, y + r); qy++)
            for (int qx = Math.Max(0, x - r); qx <= Math.Min(w - 1, x + r); qx++)
                if (cls[qy * w + qx] != cls[y * w + x]) return true;
        return false;
    }

    public static float[] Apply(float[] score, ushort[] cls, int w, int h, BoundarySuppressionOptions o)
    {
        var v = (float[])score.Clone();
        for (int i = 0; i < o.Iterations; i++)
        {
            int r = o.WidthAt(i);
            var boundary = new bool[w * h];
            for (int y = 0; y < h; y++)
                for (int x = 0; x < w; x++)
                    boundary[y * w + x] = IsBoundary(cls, w, h, x, y, r);
            var next = (float[])v.Clone();
            for (int y = 0; y < h; y++)
                for (int x = 0; x < w; x++)
                {
                    if (!boundary[y * w + x]) continue;
                    double sum = 0;
                    int count = 0;
                    for (int qy = Math.Max(0, y - 1); qy <= Math.Min(h - 1, y + 1); qy++)
                        for (int qx = Math.Max(0, x - 1); qx <= Math.Min(w - 1, x + 1); qx++)
                            if (!boundary[qy * w + qx]) { sum += v[qy * w + qx]; count++; }
                    if (count > 0) next[y * w + x] = (float)(sum / count);
                }
            v = next;
        }
        return v;
    }

    /// <summary>Blocky random class map: patches of random size and class, plus some single-pixel speckle.</summary>
    public static ushort[] RandomClasses(Random rng, int w, int h, int classes)
    {
        var cls = new ushort[w * h];
        int block = 1 + rng.Next(12);
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                var local = new Random(HashCode.Combine(x / block, y / block, classes, block));
                cls[y * w + x] = (ushort)local.Next(classes);
            }
        int speckle = rng.Next(w * h / 20 + 1);
        for (int i = 0; i < speckle; i++) cls[rng.Next(w * h)] = (ushort)rng.Next(classes);
        return cls;
    }
}
