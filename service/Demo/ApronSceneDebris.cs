namespace Strayspot.Service.Demo;

/// <summary>
/// Paints foreign-object debris (hand tools, bags, broken fragments, an animal-like blob) onto apron frames.
/// Their hues (saturated purple, cyan, orange-red, magenta, violet) and patterns (stripes, checks, speckle) never occur in
/// the normal scenes, so a model trained on those has never seen them. Mask convention: 0 in-distribution, 1 debris,
/// 255 for a 2-pixel ring around each object (edge pixels are blends, neither clearly known nor clearly foreign).
/// In the returned label map debris pixels are <see cref="ApronClasses.Ignore"/>.
/// </summary>
public static class ApronDebrisPainter
{
    public const byte Normal = 0;
    public const byte Anomaly = 1;
    public const byte Ignore = 255;
    public const int RingWidth = 2;

    private static readonly Rgb[] Hues = [new(142, 40, 205), new(10, 212, 228), new(250, 72, 18), new(232, 24, 168), new(118, 10, 255)];

    public static ApronDebrisFrame Paint(ApronFrame source, int seed, int objectCount)
    {
        if (objectCount < 0) throw new ArgumentOutOfRangeException(nameof(objectCount), $"Object count {objectCount} must not be negative.");
        var frame = source.Clone();
        int w = frame.Width, h = frame.Height;
        var rng = new ApronRandom(seed);
        var mask = new byte[w * h];
        float groundTop = GroundTop(frame);
        float scale = w / 1024f;
        int painted = 0;
        for (int k = 0; k < objectCount; k++)
        {
            bool onPavement = rng.Chance(0.85);
            if (!TryPickSpot(frame, rng, onPavement, out int cx, out int cy)) continue;
            float d = Math.Clamp((cy - groundTop) / MathF.Max(1, h - groundTop), 0.3f, 1f);
            float size = scale * rng.Range(50f, 150f) * d;
            PaintObject(frame, mask, rng, cx, cy, MathF.Max(6, size));
            painted++;
        }
        AddRing(mask, w, h);
        for (int i = 0; i < mask.Length; i++)
            if (mask[i] == Anomaly) frame.Labels[i] = ApronClasses.Ignore;
        return new ApronDebrisFrame(frame, mask, painted);
    }

    private static float GroundTop(ApronFrame f)
    {
        for (int y = 0; y < f.Height; y++)
        {
            int ground = 0;
            for (int x = 0; x < f.Width; x++)
                if (ApronClasses.IsSurface(f.Labels[y * f.Width + x])) ground++;
            if (ground * 2 > f.Width) return y;
        }
        return f.Height * 0.4f;
    }

    private static bool TryPickSpot(ApronFrame f, ApronRandom rng, bool pavement, out int x, out int y)
    {
        for (int attempt = 0; attempt < 400; attempt++)
        {
            x = rng.Next(f.Width);
            y = rng.Next(f.Height);
            byte label = f.Labels[y * f.Width + x];
            if (pavement ? ApronClasses.IsSurface(label) : label == ApronClasses.Grass) return true;
        }
        x = y = 0;
        return false;
    }

    private static void PaintObject(ApronFrame f, byte[] mask, ApronRandom rng, int cx, int cy, float size)
    {
        int shape = rng.Next(4);
        int pattern = rng.Next(4);
        Rgb main = rng.Pick(Hues).Jitter(rng, 10) * rng.Range(0.8f, 1.05f);
        Rgb second = rng.Chance(0.5) ? rng.Pick(Hues) : new Rgb(20, 16, 24);
        float angle = rng.Range(0, MathF.PI);
        float cos = MathF.Cos(angle), sin = MathF.Sin(angle);
        // Seen from a low camera, objects on the ground look flattened vertically.
        const float squash = 0.6f;
        float p1 = rng.Range(0, 6.28f), p2 = rng.Range(0, 6.28f);
        var radii = new float[7];
        for (int i = 0; i < radii.Length; i++) radii[i] = rng.Range(0.25f, 0.5f);
        uint speckleSeed = rng.NextUInt();
        var speckle = new ApronNoise(speckleSeed);
        int reach = (int)(size * 0.75f) + 2;
        for (int y = cy - reach; y <= cy + reach; y++)
        {
            if ((uint)y >= (uint)f.Height) continue;
            for (int x = cx - reach; x <= cx + reach; x++)
            {
                if ((uint)x >= (uint)f.Width) continue;
                float dx = (x + 0.5f - cx) / size, dy = (y + 0.5f - cy) / (size * squash);
                float u = dx * cos + dy * sin, v = -dx * sin + dy * cos;
                if (!Inside(shape, u, v, p1, p2, radii)) continue;
                bool alt = pattern switch
                {
                    1 => ((int)MathF.Floor(u * 7) & 1) == 1,
                    2 => (((int)MathF.Floor(u * 6) + (int)MathF.Floor(v * 6)) & 1) == 1,
                    3 => speckle.Lattice(x >> 1, y >> 1) > 0.3f,
                    _ => false,
                };
                Rgb c = alt ? second : main;
                c = c * (1.1f - 0.35f * Math.Clamp(v + 0.5f, 0f, 1f));
                int i = y * f.Width + x;
                f.Rgb[3 * i] = ToByte(c.R);
                f.Rgb[3 * i + 1] = ToByte(c.G);
                f.Rgb[3 * i + 2] = ToByte(c.B);
                mask[i] = Anomaly;
            }
        }
    }

    /// <summary>Shape tests in object units (about -0.5..0.5 along the long axis).</summary>
    private static bool Inside(int shape, float u, float v, float p1, float p2, float[] radii)
    {
        switch (shape)
        {
            case 0: // wrench: a bar with a ring at one end and an open jaw at the other
            {
                if (MathF.Abs(u) < 0.42f && MathF.Abs(v) < 0.06f) return true;
                float ru = u - 0.45f, lu = u + 0.45f;
                if (ru * ru + v * v < 0.02f && ru * ru + v * v > 0.004f) return true;
                return lu * lu + v * v < 0.022f && !(lu < 0 && MathF.Abs(v) < 0.05f);
            }
            case 1: // bag: a lumpy oval
            {
                float r = MathF.Sqrt(u * u + (v / 0.7f) * (v / 0.7f));
                float th = MathF.Atan2(v, u);
                return r < 0.42f * (1 + 0.12f * MathF.Sin(3 * th + p1) + 0.08f * MathF.Sin(5 * th + p2));
            }
            case 2: // fragment: an irregular star-convex polygon
            {
                float th = MathF.Atan2(v, u) + MathF.PI;
                float pos = th / (2 * MathF.PI) * radii.Length;
                int a = (int)pos % radii.Length, b = (a + 1) % radii.Length;
                float t = pos - MathF.Floor(pos);
                return MathF.Sqrt(u * u + v * v) < radii[a] + (radii[b] - radii[a]) * t;
            }
            default: // animal-like blob: body, head, tail
            {
                float bu = u / 0.36f, bv = v / 0.2f;
                if (bu * bu + bv * bv < 1) return true;
                float hu = u - 0.38f, hv = v + 0.12f;
                if (hu * hu + hv * hv < 0.0144f) return true;
                float tu = (u + 0.44f) / 0.13f, tv = v / 0.045f;
                return tu * tu + tv * tv < 1;
            }
        }
    }

    private static void AddRing(byte[] mask, int w, int h)
    {
        var copy = (byte[])mask.Clone();
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                if (copy[y * w + x] != Anomaly) continue;
                for (int yy = Math.Max(0, y - RingWidth); yy <= Math.Min(h - 1, y + RingWidth); yy++)
                    for (int xx = Math.Max(0, x - RingWidth); xx <= Math.Min(w - 1, x + RingWidth); xx++)
                        if (copy[yy * w + xx] != Anomaly) mask[yy * w + xx] = Ignore;
            }
    }

    private static byte ToByte(float v) => v <= 0 ? (byte)0 : v >= 255 ? (byte)255 : (byte)(v + 0.5f);
}

/// <summary>Reproducible sets of frames: normal ones for training and calibration, debris ones for evaluation.</summary>
public static class ApronSceneSet
{
    public static IReadOnlyList<ApronFrame> Normal(int count, int seed, int width = ApronSceneGenerator.DefaultWidth,
        int height = ApronSceneGenerator.DefaultHeight)
    {
        var gen = new ApronSceneGenerator(width, height);
        var frames = new ApronFrame[count];
        for (int i = 0; i < count; i++) frames[i] = gen.Render(FrameSeed(seed, i));
        return frames;
    }

    /// <summary>Held-out debris frames: scenes from seeds no training set uses, with 3 to 7 objects each.</summary>
    public static IReadOnlyList<ApronDebrisFrame> Generate(int count, int seed, int width = ApronSceneGenerator.DefaultWidth,
        int height = ApronSceneGenerator.DefaultHeight)
    {
        if (count < 0) throw new ArgumentOutOfRangeException(nameof(count), $"Frame count {count} must not be negative.");
        var gen = new ApronSceneGenerator(width, height);
        var frames = new ApronDebrisFrame[count];
        for (int i = 0; i < count; i++)
        {
            int frameSeed = FrameSeed(seed, i);
            var rng = new ApronRandom(frameSeed ^ 0x5EED);
            frames[i] = ApronDebrisPainter.Paint(gen.Render(frameSeed), frameSeed + 7919, rng.Next(3, 8));
        }
        return frames;
    }

    public static int FrameSeed(int seed, int index) => unchecked(seed * 1000003 + index * 7919 + 17);
}
