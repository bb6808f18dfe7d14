namespace Strayspot.Tests.Support;

/// <summary>
/// Colour measures for tests, written from the published standard formulas: sRGB (IEC 61966-2-1) to CIE XYZ (D65)
/// to CIELAB (CIE 15), the CIEDE2000 colour difference (CIE 142-2001, ISO/CIE 11664-6), and colour-vision
/// deficiency simulation by 3×3 matrices on linear sRGB.
/// </summary>
public static class Colorimetry
{
    public readonly record struct Lab(double L, double A, double B)
    {
        public double Chroma => Math.Sqrt(A * A + B * B);
        public double HueDegrees => (Math.Atan2(B, A) * 180 / Math.PI + 360) % 360;
    }

    public static double ToLinear(byte v)
    {
        double c = v / 255.0;
        return c <= 0.04045 ? c / 12.92 : Math.Pow((c + 0.055) / 1.055, 2.4);
    }

    public static Lab LabOf(byte r, byte g, byte b) => LabOfLinear(ToLinear(r), ToLinear(g), ToLinear(b));

    public static Lab LabOfLinear(double r, double g, double b)
    {
        // IEC 61966-2-1 matrix, D65 white (X 0.9505, Y 1, Z 1.089).
        double x = 0.4124 * r + 0.3576 * g + 0.1805 * b;
        double y = 0.2126 * r + 0.7152 * g + 0.0722 * b;
        double z = 0.0193 * r + 0.1192 * g + 0.9505 * b;
        double fx = F(x / 0.95047), fy = F(y / 1.0), fz = F(z / 1.08883);
        return new Lab(116 * fy - 16, 500 * (fx - fy), 200 * (fy - fz));

        static double F(double t) => t > 216.0 / 24389 ? Math.Cbrt(t) : (24389.0 / 27 * t + 16) / 116;
    }

    /// <summary>CIEDE2000 with kL = kC = kH = 1.</summary>
    public static double DeltaE2000(Lab p, Lab q)
    {
        const double Pow25To7 = 6103515625.0;
        double c1 = p.Chroma, c2 = q.Chroma, cBar = (c1 + c2) / 2;
        double cBar7 = Math.Pow(cBar, 7);
        double g = 0.5 * (1 - Math.Sqrt(cBar7 / (cBar7 + Pow25To7)));
        double a1 = (1 + g) * p.A, a2 = (1 + g) * q.A;
        double c1p = Math.Sqrt(a1 * a1 + p.B * p.B), c2p = Math.Sqrt(a2 * a2 + q.B * q.B);
        double h1p = HueOf(p.B, a1), h2p = HueOf(q.B, a2);

        double dL = q.L - p.L, dC = c2p - c1p;
        double dh = 0;
        if (c1p * c2p != 0)
        {
            dh = h2p - h1p;
            if (dh > 180) dh -= 360;
            else if (dh < -180) dh += 360;
        }
        double dH = 2 * Math.Sqrt(c1p * c2p) * Math.Sin(Rad(dh / 2));

        double lBar = (p.L + q.L) / 2, cBarP = (c1p + c2p) / 2;
        double hBar;
        if (c1p * c2p == 0) hBar = h1p + h2p;
        else if (Math.Abs(h1p - h2p) <= 180) hBar = (h1p + h2p) / 2;
        else hBar = h1p + h2p < 360 ? (h1p + h2p + 360) / 2 : (h1p + h2p - 360) / 2;

        double t = 1 - 0.17 * Math.Cos(Rad(hBar - 30)) + 0.24 * Math.Cos(Rad(2 * hBar))
                   + 0.32 * Math.Cos(Rad(3 * hBar + 6)) - 0.20 * Math.Cos(Rad(4 * hBar - 63));
        double dTheta = 30 * Math.Exp(-Math.Pow((hBar - 275) / 25, 2));
        double cBarP7 = Math.Pow(cBarP, 7);
        double rc = 2 * Math.Sqrt(cBarP7 / (cBarP7 + Pow25To7));
        double l50 = (lBar - 50) * (lBar - 50);
        double sl = 1 + 0.015 * l50 / Math.Sqrt(20 + l50);
        double sc = 1 + 0.045 * cBarP;
        double sh = 1 + 0.015 * cBarP * t;
        double rt = -Math.Sin(Rad(2 * dTheta)) * rc;
        double l = dL / sl, c = dC / sc, h = dH / sh;
        return Math.Sqrt(l * l + c * c + h * h + rt * c * h);

        static double Rad(double d) => d * Math.PI / 180;
        static double HueOf(double b, double a) => a == 0 && b == 0 ? 0 : (Math.Atan2(b, a) * 180 / Math.PI + 360) % 360;
    }

    /// <summary>
    /// Dichromacy simulation at full severity, applied to linear sRGB: the table of the physiologically based
    /// simulation model as Chromium's DevTools vision-deficiency emulation uses it (rows give R', G', B').
    /// </summary>
    public static readonly IReadOnlyDictionary<string, double[,]> Deficiencies = new Dictionary<string, double[,]>
    {
        ["protanopia"] = new[,] { { 0.152286, 1.052583, -0.204868 }, { 0.114503, 0.786281, 0.099216 }, { -0.003882, -0.048116, 1.051998 } },
        ["deuteranopia"] = new[,] { { 0.367322, 0.860646, -0.227968 }, { 0.280085, 0.672501, 0.047413 }, { -0.011820, 0.042940, 0.968881 } },
        ["tritanopia"] = new[,] { { 1.255528, -0.076749, -0.178779 }, { -0.078411, 0.930809, 0.147602 }, { 0.004733, 0.691367, 0.303900 } },
    };

    public static Lab SimulatedLab(byte r, byte g, byte b, double[,] m)
    {
        double lr = ToLinear(r), lg = ToLinear(g), lb = ToLinear(b);
        double Row(int i) => Math.Clamp(m[i, 0] * lr + m[i, 1] * lg + m[i, 2] * lb, 0, 1);
        return LabOfLinear(Row(0), Row(1), Row(2));
    }
}
