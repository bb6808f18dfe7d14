namespace Strayspot.Service.Demo;

/// <summary>Parked ground vehicles: boxy tugs, baggage carts and vans, with cast shadows, nearer ones in front.</summary>
internal static class ApronSceneVehicles
{
    private static readonly Rgb[] Paints = [new(214, 214, 208), new(60, 86, 122), new(56, 58, 62), new(104, 110, 66), new(188, 150, 62)];
    private static readonly Rgb Glass = new(44, 54, 70);
    private static readonly Rgb Tyre = new(26, 26, 28);

    public static void Paint(ApronCanvas c, ApronLayout l, ApronRandom rng)
    {
        int count = rng.Next(1, 6);
        var depths = new float[count];
        for (int i = 0; i < count; i++) depths[i] = rng.Range(0.22f, 1.08f);
        Array.Sort(depths);
        foreach (float d in depths)
        {
            float w = c.Width * rng.Range(0.16f, 0.3f) * d;
            float x0 = rng.Range(-0.1f, 1.0f) * c.Width - w * 0.5f;
            float yb = l.RowAtDepth(d);
            int kind = rng.Next(3);
            Rgb paint = rng.Pick(Paints).Jitter(rng, 6);
            Shadow(c, x0, yb, w);
            switch (kind)
            {
                case 0: Tug(c, rng, x0, yb, w, paint); break;
                case 1: Cart(c, rng, x0, yb, w, paint); break;
                default: Van(c, rng, x0, yb, w, paint); break;
            }
        }
    }

    private static void Shadow(ApronCanvas c, float x0, float yb, float w)
    {
        float h = w * 0.08f;
        int ya = (int)(yb - h), yEnd = (int)(yb + h);
        for (int y = Math.Max(0, ya); y <= Math.Min(c.Height - 1, yEnd); y++)
            for (int x = Math.Max(0, (int)(x0 - w * 0.05f)); x <= Math.Min(c.Width - 1, (int)(x0 + w * 1.1f)); x++)
                if (c.Labels[y * c.Width + x] is ApronClasses.Pavement or ApronClasses.Marking)
                    c.Darken(x, y, 0.62f);
    }

    /// <summary>Vertical shading: lit top, darker skirt.</summary>
    private static Func<int, int, Rgb> Shaded(Rgb paint, float top, float height) =>
        (_, y) => paint * (1.08f - 0.22f * Math.Clamp((y - top) / MathF.Max(1, height), 0f, 1f));

    private static void Wheels(ApronCanvas c, float x0, float yb, float w, float r)
    {
        c.FillEllipse(x0 + w * 0.18f, yb - r * 0.8f, r, r, Tyre, ApronClasses.Vehicle);
        c.FillEllipse(x0 + w * 0.82f, yb - r * 0.8f, r, r, Tyre, ApronClasses.Vehicle);
    }

    private static void Tug(ApronCanvas c, ApronRandom rng, float x0, float yb, float w, Rgb paint)
    {
        float h = w * rng.Range(0.38f, 0.5f), body = h * 0.55f, wheel = h * 0.16f;
        float bodyTop = yb - wheel - body;
        c.FillRect(x0, bodyTop, x0 + w, yb - wheel * 0.6f, Shaded(paint, bodyTop, body), ApronClasses.Vehicle);
        bool cabLeft = rng.Chance(0.5);
        float cabW = w * 0.38f, cx = cabLeft ? x0 + w * 0.06f : x0 + w - cabW - w * 0.06f, cabTop = yb - wheel - h;
        c.FillRect(cx, cabTop, cx + cabW, bodyTop + 1, Shaded(paint * 0.95f, cabTop, h - body), ApronClasses.Vehicle);
        c.FillRect(cx + cabW * 0.12f, cabTop + (h - body) * 0.15f, cx + cabW * 0.88f, bodyTop - (h - body) * 0.1f, (_, _) => Glass, ApronClasses.Vehicle);
        Wheels(c, x0, yb, w, wheel);
    }

    private static void Cart(ApronCanvas c, ApronRandom rng, float x0, float yb, float w, Rgb paint)
    {
        float wheel = w * 0.06f, deck = w * 0.07f, deckTop = yb - wheel - deck;
        c.FillRect(x0, deckTop, x0 + w, yb - wheel * 0.5f, (_, _) => paint * 0.9f, ApronClasses.Vehicle);
        int boxes = rng.Next(1, 4);
        float bw = w / boxes;
        Rgb skin = new Rgb(156, 160, 166).Jitter(rng, 10);
        for (int i = 0; i < boxes; i++)
        {
            float bh = w * rng.Range(0.18f, 0.32f), top = deckTop - bh, bx = x0 + i * bw + bw * 0.05f;
            float ribs = MathF.Max(3, bw / 8);
            c.FillRect(bx, top, bx + bw * 0.9f, deckTop + 1,
                (px, _) => ((int)((px - bx) / ribs) & 1) == 0 ? skin : skin * 0.9f, ApronClasses.Vehicle);
        }
        Wheels(c, x0, yb, w, wheel);
    }

    private static void Van(ApronCanvas c, ApronRandom rng, float x0, float yb, float w, Rgb paint)
    {
        float h = w * rng.Range(0.55f, 0.75f), wheel = h * 0.12f, top = yb - wheel - h;
        c.FillRect(x0, top, x0 + w, yb - wheel * 0.6f, Shaded(paint, top, h), ApronClasses.Vehicle);
        float band = h * 0.3f;
        bool frontLeft = rng.Chance(0.5);
        float gx0 = frontLeft ? x0 + w * 0.04f : x0 + w * 0.55f;
        c.FillRect(gx0, top + h * 0.08f, gx0 + w * 0.41f, top + h * 0.08f + band, (_, _) => Glass, ApronClasses.Vehicle);
        c.FillRect(x0, yb - wheel - h * 0.22f, x0 + w, yb - wheel - h * 0.17f, (_, _) => paint * 0.7f, ApronClasses.Vehicle);
        Wheels(c, x0, yb, w, wheel);
    }
}
