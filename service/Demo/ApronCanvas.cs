namespace Strayspot.Service.Demo;

/// <summary>Float colour planes plus a label plane that the scene painter draws into; converted to bytes once.</summary>
internal sealed class ApronCanvas
{
    public readonly int Width, Height;
    public readonly float[] R, G, B;
    public readonly byte[] Labels;

    public ApronCanvas(int width, int height)
    {
        Width = width;
        Height = height;
        R = new float[width * height];
        G = new float[width * height];
        B = new float[width * height];
        Labels = new byte[width * height];
    }

    public void Set(int x, int y, Rgb c, byte label)
    {
        if ((uint)x >= (uint)Width || (uint)y >= (uint)Height) return;
        int i = y * Width + x;
        R[i] = c.R; G[i] = c.G; B[i] = c.B;
        Labels[i] = label;
    }

    /// <summary>Blends a colour in; the label changes only when the paint dominates.</summary>
    public void Blend(int x, int y, Rgb c, float alpha, byte label)
    {
        if ((uint)x >= (uint)Width || (uint)y >= (uint)Height || alpha <= 0) return;
        int i = y * Width + x;
        if (alpha > 1) alpha = 1;
        R[i] += (c.R - R[i]) * alpha;
        G[i] += (c.G - G[i]) * alpha;
        B[i] += (c.B - B[i]) * alpha;
        if (alpha >= 0.5f) Labels[i] = label;
    }

    public void Darken(int x, int y, float factor)
    {
        if ((uint)x >= (uint)Width || (uint)y >= (uint)Height) return;
        int i = y * Width + x;
        R[i] *= factor; G[i] *= factor; B[i] *= factor;
    }

    public void FillRect(float x0, float y0, float x1, float y1, Func<int, int, Rgb> color, byte label)
    {
        int xa = Math.Max(0, (int)MathF.Round(x0)), xb = Math.Min(Width, (int)MathF.Round(x1));
        int ya = Math.Max(0, (int)MathF.Round(y0)), yb = Math.Min(Height, (int)MathF.Round(y1));
        for (int y = ya; y < yb; y++)
            for (int x = xa; x < xb; x++)
                Set(x, y, color(x, y), label);
    }

    public void FillEllipse(float cx, float cy, float rx, float ry, Rgb c, byte label)
    {
        int xa = Math.Max(0, (int)(cx - rx)), xb = Math.Min(Width - 1, (int)(cx + rx) + 1);
        int ya = Math.Max(0, (int)(cy - ry)), yb = Math.Min(Height - 1, (int)(cy + ry) + 1);
        for (int y = ya; y <= yb; y++)
            for (int x = xa; x <= xb; x++)
            {
                float dx = (x + 0.5f - cx) / rx, dy = (y + 0.5f - cy) / ry;
                if (dx * dx + dy * dy <= 1) Set(x, y, c, label);
            }
    }

    /// <summary>Lighting, a mild sideways illumination gradient and grain; then bytes.</summary>
    public byte[] ToRgb(float brightness, float warm, float sideLight, ApronNoise grain, float grainAmplitude)
    {
        var rgb = new byte[Width * Height * 3];
        float rMul = brightness * (1 + 0.09f * warm), gMul = brightness * (1 + 0.01f * warm), bMul = brightness * (1 - 0.1f * warm);
        for (int y = 0; y < Height; y++)
        {
            for (int x = 0; x < Width; x++)
            {
                int i = y * Width + x;
                float side = 1 + sideLight * ((float)x / Width - 0.5f);
                // Coarse grain on the ground only, in three levels: texture for the pavement, small PNGs.
                float n = Labels[i] == ApronClasses.Pavement ? grainAmplitude * MathF.Round(grain.Lattice(x >> 1, y >> 1)) : 0f;
                rgb[3 * i] = ToByte(R[i] * rMul * side + n);
                rgb[3 * i + 1] = ToByte(G[i] * gMul * side + n);
                rgb[3 * i + 2] = ToByte(B[i] * bMul * side + n);
            }
        }
        return rgb;
    }

    private static byte ToByte(float v) => v <= 0 ? (byte)0 : v >= 255 ? (byte)255 : (byte)(v + 0.5f);
}

/// <summary>A colour in 0..255 floats.</summary>
internal readonly record struct Rgb(float R, float G, float B)
{
    public static Rgb operator *(Rgb c, float k) => new(c.R * k, c.G * k, c.B * k);
    public static Rgb operator +(Rgb c, float k) => new(c.R + k, c.G + k, c.B + k);
    public Rgb Lerp(Rgb other, float t) => new(R + (other.R - R) * t, G + (other.G - G) * t, B + (other.B - B) * t);
    public Rgb Jitter(ApronRandom rng, float amount) =>
        new(R + rng.Range(-amount, amount), G + rng.Range(-amount, amount), B + rng.Range(-amount, amount));
}
