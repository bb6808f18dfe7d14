using System.Globalization;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Regions;

namespace Strayspot.Service.Rendering;

/// <summary>
/// The overlay: a picture that explains itself. The frame with flagged pixels tinted in heat colours and ringed by a
/// light-inside, dark-outside outline, each region boxed the same way and numbered with its report id, and a legend
/// strip below (colour bar, its score range, the threshold marked, which scale it is). Light and dark lines side by
/// side read on any background, pale concrete and dark tarmac alike.
/// </summary>
public static class OverlayRenderer
{
    private static readonly Rgb24 Light = new(255, 255, 255);
    private static readonly Rgb24 Dark = new(16, 18, 20);
    private static readonly Rgb24 StripBackground = new(28, 32, 36);
    private static readonly Rgb24 StripInk = new(236, 238, 240);

    /// <summary>Glyph scale for a frame: numbers about 1/70 of the shorter side tall, never under 7 pixels.</summary>
    public static int GlyphScaleFor(int width, int height) => Math.Clamp((int)Math.Round(Math.Min(width, height) / 256.0), 1, 6);

    public static int StripHeight(int glyphScale) => PixelFont.Height(glyphScale) * 2 + 10 * glyphScale + 4;

    public static Image<Rgb24> Render(Image<Rgb24> frame, ReadOnlySpan<float> score, ReadOnlySpan<byte> mask,
        IReadOnlyList<Region> regions, HeatScale scale, float opacity = 0.5f)
    {
        int width = frame.Width, height = frame.Height;
        int g = GlyphScaleFor(width, height);
        int strip = StripHeight(g);
        int total = height + strip;
        var pixels = new Rgb24[width * total];
        frame.CopyPixelDataTo(pixels.AsSpan(0, width * height));
        Tint(pixels, width, height, score, mask, scale, opacity);
        foreach (var r in regions) DrawBox(pixels, width, height, r);
        var labels = RegionLabels.Place(regions, width, height, g, padding: g + 1);
        foreach (var l in labels)
            if (l.LeaderTo is { } to) DrawLeader(pixels, width, height, l.X + l.Width / 2, l.Y + l.Height / 2, to.X, to.Y);
        foreach (var l in labels) DrawTag(pixels, width, height, l, g);
        DrawLegend(pixels.AsSpan(width * height), width, strip, scale, regions.Count, g);
        return Image.LoadPixelData<Rgb24>(pixels, width, total);
    }

    private static void Tint(Rgb24[] pixels, int width, int height, ReadOnlySpan<float> score, ReadOnlySpan<byte> mask, HeatScale scale, float opacity)
    {
        var table = ColorScales.HeatTable;
        for (int y = 0; y < height; y++)
        {
            int o = y * width;
            for (int x = 0; x < width; x++)
            {
                bool on = mask[o + x] != 0;
                bool edge = false;
                // A pixel on the mask's border turns light; its outside neighbours turn dark: a double line.
                if (x > 0 && (mask[o + x - 1] != 0) != on) edge = true;
                else if (x < width - 1 && (mask[o + x + 1] != 0) != on) edge = true;
                else if (y > 0 && (mask[o + x - width] != 0) != on) edge = true;
                else if (y < height - 1 && (mask[o + x + width] != 0) != on) edge = true;
                if (edge) { pixels[o + x] = on ? Light : Dark; continue; }
                if (!on) continue;
                var heat = table[scale.IndexOf(score[o + x])];
                var p = pixels[o + x];
                pixels[o + x] = new Rgb24(
                    (byte)(p.R + (heat.R - p.R) * opacity),
                    (byte)(p.G + (heat.G - p.G) * opacity),
                    (byte)(p.B + (heat.B - p.B) * opacity));
            }
        }
    }

    private static void DrawBox(Span<Rgb24> pixels, int width, int height, Region r)
    {
        // Light ring two pixels off the region, dark rings either side of it.
        int l = r.Left - 2, t = r.Top - 2, rt = r.Left + r.Width + 1, b = r.Top + r.Height + 1;
        Rect(pixels, width, height, l - 1, t - 1, rt + 1, b + 1, Dark);
        Rect(pixels, width, height, l, t, rt, b, Light);
        Rect(pixels, width, height, l + 1, t + 1, rt - 1, b - 1, Dark);
    }

    private static void Rect(Span<Rgb24> pixels, int width, int height, int l, int t, int r, int b, Rgb24 c)
    {
        for (int x = l; x <= r; x++) { Put(pixels, width, height, x, t, c); Put(pixels, width, height, x, b, c); }
        for (int y = t; y <= b; y++) { Put(pixels, width, height, l, y, c); Put(pixels, width, height, r, y, c); }
    }

    private static void Put(Span<Rgb24> pixels, int width, int height, int x, int y, Rgb24 c)
    {
        if ((uint)x < (uint)width && (uint)y < (uint)height) pixels[y * width + x] = c;
    }

    private static void FillRect(Span<Rgb24> pixels, int width, int height, int x, int y, int w, int h, Rgb24 c)
    {
        for (int yy = Math.Max(0, y); yy < Math.Min(height, y + h); yy++)
            pixels.Slice(yy * width + Math.Max(0, x), Math.Max(0, Math.Min(width, x + w) - Math.Max(0, x))).Fill(c);
    }

    private static void DrawLeader(Span<Rgb24> pixels, int width, int height, int x0, int y0, int x1, int y1)
    {
        Line(pixels, width, height, x0, y0, x1, y1, Dark, thick: true);
        Line(pixels, width, height, x0, y0, x1, y1, Light, thick: false);
    }

    private static void Line(Span<Rgb24> pixels, int width, int height, int x0, int y0, int x1, int y1, Rgb24 c, bool thick)
    {
        int dx = Math.Abs(x1 - x0), dy = -Math.Abs(y1 - y0), sx = x0 < x1 ? 1 : -1, sy = y0 < y1 ? 1 : -1, err = dx + dy;
        while (true)
        {
            if (thick)
                for (int oy = -1; oy <= 1; oy++)
                for (int ox = -1; ox <= 1; ox++) Put(pixels, width, height, x0 + ox, y0 + oy, c);
            else Put(pixels, width, height, x0, y0, c);
            if (x0 == x1 && y0 == y1) break;
            int e2 = 2 * err;
            if (e2 >= dy) { err += dy; x0 += sx; }
            if (e2 <= dx) { err += dx; y0 += sy; }
        }
    }

    private static void DrawTag(Span<Rgb24> pixels, int width, int height, RegionLabel l, int g)
    {
        FillRect(pixels, width, height, l.X, l.Y, l.Width, l.Height, Dark);
        Rect(pixels, width, height, l.X, l.Y, l.X + l.Width - 1, l.Y + l.Height - 1, Light);
        PixelFont.Draw(pixels, width, height, l.RegionId.ToString(CultureInfo.InvariantCulture), l.X + g + 1, l.Y + g + 1, g, Light);
    }

    private static void DrawLegend(Span<Rgb24> strip, int width, int stripHeight, HeatScale scale, int regionCount, int g)
    {
        strip.Fill(StripBackground);
        int textH = PixelFont.Height(g);
        int pad = 2 * g + 2;
        int barTop = pad, barH = textH;
        string title = "ANOMALY SCORE";
        int titleW = PixelFont.Measure(title, g);
        PixelFont.Draw(strip, width, stripHeight, title, pad, barTop, g, StripInk);
        string mode = scale.Mode == HeatScaleMode.Fixed ? "FIXED SCALE" : "THIS FRAMES RANGE";
        int modeW = PixelFont.Measure(mode, g);
        int barLeft = pad + titleW + 3 * g + 4;
        int barRight = width - pad - modeW - 3 * g - 4;
        if (barRight - barLeft < 40) { barLeft = pad; barRight = width - pad; title = ""; mode = ""; }
        else PixelFont.Draw(strip, width, stripHeight, mode, width - pad - modeW, barTop, g, StripInk);
        var table = ColorScales.HeatTable;
        int barW = barRight - barLeft;
        for (int x = 0; x < barW; x++)
        {
            var c = table[Math.Clamp((int)Math.Round(x * 255.0 / Math.Max(1, barW - 1)), 0, 255)];
            for (int y = barTop; y < barTop + barH; y++) strip[y * width + barLeft + x] = c;
        }
        int tx = barLeft + (int)Math.Round(scale.PositionOf(scale.Threshold) * (barW - 1));
        // The threshold: a light line with dark edges across the bar, reaching a little beyond it.
        for (int y = barTop - g; y < barTop + barH + g; y++)
        {
            for (int dx = -g - 1; dx <= g + 1; dx++)
            {
                int x = tx + dx;
                if ((uint)x >= (uint)width || (uint)y >= (uint)stripHeight) continue;
                strip[y * width + x] = Math.Abs(dx) <= g / 2 ? Light : (Math.Abs(dx) <= g / 2 + 1 ? Dark : strip[y * width + x]);
            }
        }
        int row2 = barTop + barH + 2 * g + 2;
        string low = Format(scale.Low), high = Format(scale.High);
        string thr = "THRESHOLD " + Format(scale.Threshold);
        int thrW = PixelFont.Measure(thr, g);
        int thrX = Math.Clamp(tx - thrW / 2, barLeft, Math.Max(barLeft, barRight - thrW));
        PixelFont.Draw(strip, width, stripHeight, thr, thrX, row2, g, StripInk);
        int lowW = PixelFont.Measure(low, g), highW = PixelFont.Measure(high, g);
        if (barLeft + lowW + 4 * g < thrX) PixelFont.Draw(strip, width, stripHeight, low, barLeft, row2, g, StripInk);
        if (barRight - highW - 4 * g > thrX + thrW) PixelFont.Draw(strip, width, stripHeight, high, barRight - highW, row2, g, StripInk);
        // Under the title: how many regions are boxed and numbered (the numbers are the report's region ids).
        if (title.Length > 0)
        {
            string what = regionCount + (regionCount == 1 ? " REGION" : " REGIONS");
            PixelFont.Draw(strip, width, stripHeight, what, pad, row2, g, StripInk);
        }
    }

    private static string Format(float v) => v.ToString("0.00", CultureInfo.InvariantCulture);
}
