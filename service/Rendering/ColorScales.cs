using SixLabors.ImageSharp.PixelFormats;

namespace Strayspot.Service.Rendering;

/// <summary>
/// Our own colours, computed rather than copied: class colours from the descriptor or generated,
/// and a heat scale whose OKLab lightness rises linearly, so equal score steps look like equal steps.
/// </summary>
public static class ColorScales
{
    /// <summary>Display colours of a model's classes: the descriptor's where given, else generated ones.</summary>
    public static Rgb24[] ClassColors(int count, IReadOnlyList<string?>? given = null)
    {
        var colors = new Rgb24[count];
        for (int i = 0; i < count; i++)
        {
            string hex = given is not null && i < given.Count && given[i] is { } g && Strayspot.Service.Models.ClassColors.IsHexColor(g)
                ? g : Strayspot.Service.Models.ClassColors.Generated(i);
            var (r, gr, b) = Strayspot.Service.Models.ClassColors.Parse(hex);
            colors[i] = new Rgb24(r, gr, b);
        }
        return colors;
    }

    /// <summary>
    /// The heat scale as a 256-entry table: dark pine green (low) through teal and azure to violet and a pale
    /// orchid (high). OKLab lightness rises linearly (0.20 → 0.95) while the hue turns from 150° to 330°, so
    /// steps read in order by lightness alone, also for viewers who do not tell some hues apart.
    /// </summary>
    public static Rgb24[] HeatTable { get; } = BuildHeatTable();

    private static Rgb24[] BuildHeatTable()
    {
        var table = new Rgb24[256];
        for (int i = 0; i < 256; i++)
        {
            double t = i / 255.0;
            double lightness = 0.20 + 0.75 * t;
            double chroma = 0.05 + 0.11 * Math.Sin(Math.PI * Math.Min(1.0, t * 1.1));
            double hue = 150.0 + 180.0 * t; // green → teal → azure → violet → orchid
            table[i] = FromOklch(lightness, chroma, hue);
        }
        return table;
    }

    /// <summary>A few evenly spaced colours of the heat scale as "#rrggbb", low first (for gradients on pages).</summary>
    public static string[] HeatStops(int count)
    {
        var stops = new string[count];
        for (int i = 0; i < count; i++)
        {
            var c = HeatTable[(int)Math.Round(i * 255.0 / (count - 1))];
            stops[i] = $"#{c.R:x2}{c.G:x2}{c.B:x2}";
        }
        return stops;
    }

    public static Rgb24 FromOklch(double l, double c, double hueDegrees)
    {
        double h = hueDegrees * Math.PI / 180.0;
        // Reduce chroma until the colour fits sRGB, so hue and lightness are kept.
        for (int step = 0; step < 40; step++)
        {
            var (r, g, b) = OklabToLinearSrgb(l, c * Math.Cos(h), c * Math.Sin(h));
            if (r >= -1e-4 && g >= -1e-4 && b >= -1e-4 && r <= 1.0001 && g <= 1.0001 && b <= 1.0001)
                return new Rgb24(Encode(r), Encode(g), Encode(b));
            c *= 0.9;
        }
        var (r0, g0, b0) = OklabToLinearSrgb(l, 0, 0);
        return new Rgb24(Encode(r0), Encode(g0), Encode(b0));
    }

    // OKLab to linear sRGB, matrices from the published OKLab definition (an open colour-space standard).
    private static (double R, double G, double B) OklabToLinearSrgb(double l, double a, double b)
    {
        double l_ = l + 0.3963377774 * a + 0.2158037573 * b;
        double m_ = l - 0.1055613458 * a - 0.0638541728 * b;
        double s_ = l - 0.0894841775 * a - 1.2914855480 * b;
        double L = l_ * l_ * l_, M = m_ * m_ * m_, S = s_ * s_ * s_;
        return (
            +4.0767416621 * L - 3.3077115913 * M + 0.2309699292 * S,
            -1.2684380046 * L + 2.6097574011 * M - 0.3413193965 * S,
            -0.0041960863 * L - 0.7034186147 * M + 1.7076147010 * S);
    }

    private static byte Encode(double linear)
    {
        linear = Math.Clamp(linear, 0, 1);
        double srgb = linear <= 0.0031308 ? 12.92 * linear : 1.055 * Math.Pow(linear, 1 / 2.4) - 0.055;
        return (byte)Math.Clamp((int)Math.Round(srgb * 255), 0, 255);
    }
}
