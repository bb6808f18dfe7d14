namespace Strayspot.Service.Demo;

/// <summary>Painted guidance lines, stop bars and stand outlines, drawn on the ground plane so they narrow with distance.</summary>
internal static class ApronSceneMarkings
{
    public static void Paint(ApronCanvas c, ApronLayout l, ApronRandom rng)
    {
        Rgb yellow = new Rgb(226, 188, 36).Jitter(rng, 8);
        Rgb white = new Rgb(236, 236, 228).Jitter(rng, 5);
        var wear = new ApronNoise(rng.NextUInt());
        float s = l.Scale1024;

        int guides = rng.Next(1, 4);
        for (int i = 0; i < guides; i++)
            GroundLine(c, l, wear, rng.Range(-0.2f, 1.2f) * c.Width, rng.Range(5f, 8f) * s, 0.05f, 1f, yellow, dashed: false);

        int bars = rng.Next(0, 3);
        for (int i = 0; i < bars; i++)
        {
            float d = rng.Range(0.3f, 0.9f);
            float x0 = rng.Range(-0.3f, 0.6f) * c.Width;
            CrossLine(c, l, wear, x0, x0 + rng.Range(0.3f, 0.9f) * c.Width, d, rng.Range(9f, 16f) * s, yellow);
        }

        if (rng.Chance(0.65))
        {
            float xa = rng.Range(-0.2f, 0.6f) * c.Width, xb = xa + rng.Range(0.35f, 0.7f) * c.Width;
            float d0 = rng.Range(0.2f, 0.45f), d1 = Math.Min(1.1f, d0 + rng.Range(0.25f, 0.6f));
            float wb = rng.Range(4f, 6f) * s;
            GroundLine(c, l, wear, xa, wb, d0, d1, white, dashed: false);
            GroundLine(c, l, wear, xb, wb, d0, d1, white, dashed: false);
            CrossLine(c, l, wear, xa, xb, d0, wb * 2, white);
            if (d1 <= 1) CrossLine(c, l, wear, xa, xb, d1, wb * 2, white);
        }

        if (rng.Chance(0.5))
            GroundLine(c, l, wear, rng.Range(-0.1f, 1.1f) * c.Width, rng.Range(3f, 5f) * s, 0.08f, 1f, white, dashed: true);
    }

    /// <summary>A line along the ground that meets the bottom row at <paramref name="xBottom"/>.</summary>
    private static void GroundLine(ApronCanvas c, ApronLayout l, ApronNoise wear, float xBottom, float halfWidthBottom,
        float d0, float d1, Rgb color, bool dashed)
    {
        int y0 = Math.Max(0, (int)l.RowAtDepth(d0)), y1 = Math.Min(c.Height - 1, (int)MathF.Ceiling(l.RowAtDepth(Math.Min(d1, 1f))));
        for (int y = y0; y <= y1; y++)
        {
            float d = l.Depth(y + 0.5f);
            if (d <= 0) continue;
            if (dashed && ((int)(4f / d) & 1) == 1) continue;
            float xc = l.ImageX(xBottom, d), hw = MathF.Max(0.6f, halfWidthBottom * d);
            int xa = (int)MathF.Floor(xc - hw - 1), xb = (int)MathF.Ceiling(xc + hw + 1);
            for (int x = xa; x <= xb; x++)
            {
                float cover = Math.Clamp(hw + 0.5f - MathF.Abs(x + 0.5f - xc), 0f, 1f);
                c.Blend(x, y, color, cover * Worn(wear, x, y), ApronClasses.Marking);
            }
        }
    }

    /// <summary>A line across the ground at one depth, between two ground lines.</summary>
    private static void CrossLine(ApronCanvas c, ApronLayout l, ApronNoise wear, float xBottom0, float xBottom1, float d,
        float thicknessBottom, Rgb color)
    {
        float yc = l.RowAtDepth(d), half = MathF.Max(0.6f, thicknessBottom * d * 0.5f);
        int ya = (int)MathF.Floor(yc - half - 1), yb = (int)MathF.Ceiling(yc + half + 1);
        for (int y = ya; y <= yb; y++)
        {
            float cover = Math.Clamp(half + 0.5f - MathF.Abs(y + 0.5f - yc), 0f, 1f);
            float dy = l.Depth(y + 0.5f);
            int xa = (int)l.ImageX(xBottom0, dy), xb = (int)l.ImageX(xBottom1, dy);
            for (int x = Math.Max(0, xa); x <= Math.Min(c.Width - 1, xb); x++)
                c.Blend(x, y, color, cover * Worn(wear, x, y), ApronClasses.Marking);
        }
    }

    private static float Worn(ApronNoise wear, int x, int y) => Math.Clamp(0.9f + 0.25f * wear.Value(x, y, 9, 9), 0.55f, 1f);
}
