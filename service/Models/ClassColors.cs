using System.Globalization;

namespace Strayspot.Service.Models;

/// <summary>Colours for classes that have none in their descriptor.</summary>
public static class ClassColors
{
    // Stepping the hue by the golden angle keeps any number of consecutive classes far apart on the wheel.
    private const double GoldenAngleDegrees = 137.50776405003785;

    public static bool IsHexColor(string s)
    {
        if (s.Length != 7 || s[0] != '#') return false;
        for (int i = 1; i < 7; i++)
            if (!char.IsAsciiHexDigit(s[i])) return false;
        return true;
    }

    /// <summary>Class <paramref name="index"/>'s generated colour as "#rrggbb".</summary>
    public static string Generated(int index)
    {
        double hue = (23.0 + index * GoldenAngleDegrees) % 360.0;
        // Alternate saturation/value every full turn-ish so long lists still differ when hues come close.
        double sat = (index / 3) % 2 == 0 ? 0.70 : 0.50;
        double val = (index / 5) % 2 == 0 ? 0.92 : 0.72;
        var (r, g, b) = HsvToRgb(hue, sat, val);
        return string.Create(CultureInfo.InvariantCulture, $"#{r:x2}{g:x2}{b:x2}");
    }

    public static (byte R, byte G, byte B) Parse(string hex) =>
        (byte.Parse(hex.AsSpan(1, 2), NumberStyles.HexNumber), byte.Parse(hex.AsSpan(3, 2), NumberStyles.HexNumber),
         byte.Parse(hex.AsSpan(5, 2), NumberStyles.HexNumber));

    private static (byte, byte, byte) HsvToRgb(double h, double s, double v)
    {
        double c = v * s, x = c * (1 - Math.Abs(h / 60.0 % 2 - 1)), m = v - c;
        (double r, double g, double b) = (int)(h / 60.0) switch
        {
            0 => (c, x, 0.0), 1 => (x, c, 0.0), 2 => (0.0, c, x),
            3 => (0.0, x, c), 4 => (x, 0.0, c), _ => (c, 0.0, x),
        };
        static byte B(double t) => (byte)Math.Clamp(Math.Round(t * 255), 0, 255);
        return (B(r + m), B(g + m), B(b + m));
    }
}
