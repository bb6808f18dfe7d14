namespace Strayspot.Service.Demo;

/// <summary>
/// Paints synthetic frames as seen from a camera on an apron vehicle: sky, a skyline of terminal buildings,
/// a grass verge, wide pavement with painted guidance lines and stands, and parked ground vehicles.
/// The same seed and size always give the same frame.
/// </summary>
public sealed class ApronSceneGenerator
{
    public const int DefaultWidth = 1024;
    public const int DefaultHeight = 512;

    public ApronSceneGenerator(int width = DefaultWidth, int height = DefaultHeight)
    {
        if (width < 16 || height < 16)
            throw new ArgumentOutOfRangeException(nameof(width), $"Apron frames must be at least 16x16, got {width}x{height}.");
        Width = width;
        Height = height;
    }

    public int Width { get; }
    public int Height { get; }

    public ApronFrame Render(int seed)
    {
        var rng = new ApronRandom(seed);
        var canvas = new ApronCanvas(Width, Height);
        var layout = new ApronLayout(Width, Height, rng);
        PaintSky(canvas, layout, rng);
        PaintBuildings(canvas, layout, rng);
        PaintGrass(canvas, layout, rng);
        PaintPavement(canvas, layout, rng);
        ApronSceneMarkings.Paint(canvas, layout, rng);
        ApronSceneVehicles.Paint(canvas, layout, rng);
        float brightness = rng.Range(0.72f, 1.12f);
        float warm = rng.Range(-1f, 1f);
        float side = rng.Range(-0.15f, 0.15f);
        var rgb = canvas.ToRgb(brightness, warm, side, new ApronNoise(rng.NextUInt()), rng.Range(1.5f, 3f));
        return new ApronFrame(Width, Height, rgb, canvas.Labels);
    }

    private static void PaintSky(ApronCanvas c, ApronLayout l, ApronRandom rng)
    {
        var kind = rng.Next(3);
        Rgb top = kind switch
        {
            0 => new Rgb(92, 142, 204),
            1 => new Rgb(128, 160, 202),
            _ => new Rgb(156, 170, 194),
        };
        top = top.Jitter(rng, 8);
        Rgb horizon = new Rgb(204, 212, 222).Jitter(rng, 6);
        var clouds = new ApronNoise(rng.NextUInt());
        float cloudiness = rng.Range(0f, 0.5f);
        int yEnd = (int)MathF.Ceiling(l.Horizon);
        for (int y = 0; y < Math.Min(yEnd, c.Height); y++)
        {
            float t = l.Horizon <= 0 ? 1 : y / l.Horizon;
            Rgb baseColor = top.Lerp(horizon, t * t);
            for (int x = 0; x < c.Width; x++)
            {
                float n = clouds.Value(x * l.Scale1024, y * 3f * l.Scale1024, 140, 140);
                float cloud = MathF.Max(0, n - 0.35f + cloudiness * 0.3f) * 1.6f;
                c.Set(x, y, baseColor.Lerp(new Rgb(218, 226, 240), MathF.Min(0.8f, cloud)), ApronClasses.Sky);
            }
        }
    }

    private static void PaintBuildings(ApronCanvas c, ApronLayout l, ApronRandom rng)
    {
        Rgb[] facades = [new(150, 146, 140), new(176, 164, 144), new(124, 120, 116), new(188, 180, 166), new(132, 118, 108)];
        Rgb glass = new(58, 74, 92);
        float x = -rng.Range(0, 40) * l.Scale1024;
        int terminalAt = rng.Next(3);
        int index = 0;
        while (x < c.Width)
        {
            bool terminal = index == terminalAt;
            float w = (terminal ? rng.Range(0.28f, 0.45f) : rng.Range(0.05f, 0.2f)) * c.Width;
            if (!terminal && rng.Chance(0.22)) { x += w * 0.6f; index++; continue; }
            float h = (terminal ? rng.Range(0.07f, 0.11f) : rng.Range(0.03f, 0.15f)) * c.Height;
            Rgb facade = rng.Pick(facades).Jitter(rng, 8);
            float top = l.Horizon - h;
            float bandTop = top + h * rng.Range(0.2f, 0.35f), bandBottom = bandTop + h * rng.Range(0.2f, 0.35f);
            bool windows = terminal || rng.Chance(0.5);
            float shade = rng.Range(0.85f, 1.05f);
            float x0 = x;
            c.FillRect(x0, top, x0 + w, l.Horizon + 1, (px, py) =>
            {
                // Glass band with mullions on terminals; plain panels with a faint vertical seam elsewhere.
                if (windows && py >= bandTop && py < bandBottom)
                    return ((px - (int)x0) % Math.Max(4, (int)(14 * l.Scale1024)) < 2) ? facade * 0.8f : glass;
                float seam = ((px - (int)x0) % Math.Max(6, (int)(40 * l.Scale1024)) == 0) ? 0.88f : 1f;
                return facade * (shade * seam);
            }, ApronClasses.Building);
            x += w;
            index++;
        }
        if (rng.Chance(0.5))
        {
            float tx = rng.Range(0.1f, 0.9f) * c.Width;
            float shaftW = 0.016f * c.Width, shaftH = rng.Range(0.14f, 0.2f) * c.Height;
            Rgb concrete = new Rgb(184, 182, 176).Jitter(rng, 6);
            c.FillRect(tx, l.Horizon - shaftH, tx + shaftW, l.Horizon + 1, (_, _) => concrete, ApronClasses.Building);
            float cabW = shaftW * 3, cabH = 0.035f * c.Height;
            c.FillRect(tx - shaftW, l.Horizon - shaftH - cabH, tx - shaftW + cabW, l.Horizon - shaftH,
                (_, py) => py < l.Horizon - shaftH - cabH * 0.25f ? glass : concrete, ApronClasses.Building);
        }
    }

    private static void PaintGrass(ApronCanvas c, ApronLayout l, ApronRandom rng)
    {
        Rgb grass = new Rgb(84, 124, 54).Jitter(rng, 8);
        var tufts = new ApronNoise(rng.NextUInt());
        float phase = rng.Range(0, 6.28f);
        for (int y = Math.Max(0, (int)l.Horizon); y < c.Height; y++)
        {
            for (int x = 0; x < c.Width; x++)
            {
                float edge = l.GrassEnd + 2.5f * l.Scale1024 * MathF.Sin(x * 0.02f / l.Scale1024 + phase);
                bool island = l.IslandSide != 0 && l.InIsland(x, y);
                if (y >= edge && !island) continue;
                float n = tufts.Fractal(x, y * 2, 24 * l.Scale1024);
                float fine = tufts.Lattice(x >> 1, (y >> 1) + 9973);
                c.Set(x, y, grass * (1 + 0.14f * n) + 7 * fine, ApronClasses.Grass);
            }
        }
    }

    private static void PaintPavement(ApronCanvas c, ApronLayout l, ApronRandom rng)
    {
        bool concrete = rng.Chance(0.6);
        Rgb baseColor = concrete ? new Rgb(166, 164, 158).Jitter(rng, 10) : new Rgb(82, 84, 88).Jitter(rng, 6);
        var stains = new ApronNoise(rng.NextUInt());
        float stainAmp = rng.Range(0.04f, 0.1f);
        // Repair patches: darker asphalt rectangles laid on the ground plane.
        int patches = rng.Next(0, 3);
        var patch = new (float X0, float X1, float D0, float D1)[patches];
        for (int i = 0; i < patches; i++)
        {
            float d0 = rng.Range(0.15f, 0.8f);
            float xb = rng.Range(-0.3f, 1.3f) * c.Width;
            patch[i] = (xb, xb + rng.Range(0.1f, 0.3f) * c.Width, d0, d0 + rng.Range(0.06f, 0.2f));
        }
        float jointSpacing = 0.18f * c.Width, jointOffset = rng.Range(0, jointSpacing);
        for (int y = 0; y < c.Height; y++)
        {
            float d = l.Depth(y + 0.5f);
            for (int x = 0; x < c.Width; x++)
            {
                int i = y * c.Width + x;
                if (y < l.Horizon || c.Labels[i] != ApronClasses.Pavement) continue;
                float n = stains.Fractal(x, y * 2.5f, 90 * l.Scale1024);
                Rgb col = baseColor * (1 + stainAmp * n);
                float xb = l.GroundX(x, d);
                for (int p = 0; p < patches; p++)
                    if (xb >= patch[p].X0 && xb < patch[p].X1 && d >= patch[p].D0 && d < patch[p].D1)
                        col = concrete ? col * 0.72f : col * 0.85f;
                if (concrete && d > 0.12f)
                {
                    // Slab joints: lines along the ground plane, spaced evenly in ground distance (1/depth).
                    float m = (xb - jointOffset) / jointSpacing;
                    float sideways = MathF.Abs(m - MathF.Round(m)) * jointSpacing * d;
                    float z = 2f / d;
                    float along = (z - MathF.Floor(z)) * 0.5f * (c.Height - l.Horizon) * d * d;
                    if (sideways < 0.9f || along < 1.1f)
                        col = col * 0.84f;
                }
                c.Set(x, y, col, ApronClasses.Pavement);
            }
        }
    }
}

/// <summary>Where the horizon, verge and ground plane sit in one frame, and the ground-plane perspective.</summary>
internal sealed class ApronLayout
{
    public ApronLayout(int width, int height, ApronRandom rng)
    {
        Width = width;
        Height = height;
        Scale1024 = width / 1024f;
        Horizon = rng.Range(0.28f, 0.38f) * height;
        GrassEnd = Horizon + rng.Range(0.035f, 0.08f) * height;
        VanishX = rng.Range(0.3f, 0.7f) * width;
        IslandSide = rng.Chance(0.35) ? (rng.Chance(0.5) ? -1 : 1) : 0;
        IslandDepth = rng.Range(0.45f, 0.8f);
        IslandReach = rng.Range(0.12f, 0.3f) * width;
    }

    public int Width { get; }
    public int Height { get; }
    public float Scale1024 { get; }
    public float Horizon { get; }
    public float GrassEnd { get; }
    public float VanishX { get; }
    public int IslandSide { get; }
    public float IslandDepth { get; }
    public float IslandReach { get; }

    /// <summary>0 at the horizon, 1 at the bottom row: image-space nearness on the ground plane.</summary>
    public float Depth(float y) => Math.Clamp((y - Horizon) / (Height - Horizon), 0f, 1f);

    /// <summary>The bottom-row x of the ground line through (x, depth d).</summary>
    public float GroundX(float x, float d) => d <= 1e-4f ? VanishX : VanishX + (x - VanishX) / d;

    /// <summary>Image x at depth d of the ground line that meets the bottom row at xb.</summary>
    public float ImageX(float xb, float d) => VanishX + (xb - VanishX) * d;

    public float RowAtDepth(float d) => Horizon + d * (Height - Horizon);

    /// <summary>A triangular grass island in a lower corner.</summary>
    public bool InIsland(int x, int y)
    {
        float d = Depth(y);
        if (d < IslandDepth) return false;
        float reach = IslandReach * (d - IslandDepth) / (1 - IslandDepth);
        return IslandSide < 0 ? x < reach : x >= Width - reach;
    }
}
