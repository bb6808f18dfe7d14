using System.Globalization;
using Strayspot.Service.Rendering;
using Strayspot.Tests.Support;
using Xunit.Abstractions;

namespace Strayspot.Tests.Service.Rendering;

/// <summary>The heat scale is ordered for the eye: lightness rises step by step and neighbouring steps stay apart, also under simulated colour-vision deficiencies.</summary>
public sealed class HeatColorsTests(ITestOutputHelper output)
{
    // The 34 pairs of the CIEDE2000 supplementary test data published with the formula's implementation notes
    // (L1 a1 b1 L2 a2 b2 ΔE00), the reference every implementation of the standard is checked against.
    private const string StandardPairs = """
        50.0000 2.6772 -79.7751 50.0000 0.0000 -82.7485 2.0425
        50.0000 3.1571 -77.2803 50.0000 0.0000 -82.7485 2.8615
        50.0000 2.8361 -74.0200 50.0000 0.0000 -82.7485 3.4412
        50.0000 -1.3802 -84.2814 50.0000 0.0000 -82.7485 1.0000
        50.0000 -1.1848 -84.8006 50.0000 0.0000 -82.7485 1.0000
        50.0000 -0.9009 -85.5211 50.0000 0.0000 -82.7485 1.0000
        50.0000 0.0000 0.0000 50.0000 -1.0000 2.0000 2.3669
        50.0000 -1.0000 2.0000 50.0000 0.0000 0.0000 2.3669
        50.0000 2.4900 -0.0010 50.0000 -2.4900 0.0009 7.1792
        50.0000 2.4900 -0.0010 50.0000 -2.4900 0.0010 7.1792
        50.0000 2.4900 -0.0010 50.0000 -2.4900 0.0011 7.2195
        50.0000 2.4900 -0.0010 50.0000 -2.4900 0.0012 7.2195
        50.0000 -0.0010 2.4900 50.0000 0.0009 -2.4900 4.8045
        50.0000 -0.0010 2.4900 50.0000 0.0010 -2.4900 4.8045
        50.0000 -0.0010 2.4900 50.0000 0.0011 -2.4900 4.7461
        50.0000 2.5000 0.0000 50.0000 0.0000 -2.5000 4.3065
        50.0000 2.5000 0.0000 73.0000 25.0000 -18.0000 27.1492
        50.0000 2.5000 0.0000 61.0000 -5.0000 29.0000 22.8977
        50.0000 2.5000 0.0000 56.0000 -27.0000 -3.0000 31.9030
        50.0000 2.5000 0.0000 58.0000 24.0000 15.0000 19.4535
        50.0000 2.5000 0.0000 50.0000 3.1736 0.5854 1.0000
        50.0000 2.5000 0.0000 50.0000 3.2972 0.0000 1.0000
        50.0000 2.5000 0.0000 50.0000 1.8634 0.5757 1.0000
        50.0000 2.5000 0.0000 50.0000 3.2592 0.3350 1.0000
        60.2574 -34.0099 36.2677 60.4626 -34.1751 39.4387 1.2644
        63.0109 -31.0961 -5.8663 62.8187 -29.7946 -4.0864 1.2630
        61.2901 3.7196 -5.3901 61.4292 2.2480 -4.9620 1.8731
        35.0831 -44.1164 3.7933 35.0232 -40.0716 1.5901 1.8645
        22.7233 20.0904 -46.6940 23.0331 14.9730 -42.5619 2.0373
        36.4612 47.8580 18.3852 36.2715 50.5065 21.2231 1.4146
        90.8027 -2.0831 1.4410 91.1528 -1.6435 0.0447 1.4441
        90.9257 -0.5406 -0.9208 88.6381 -0.8985 -0.7239 1.5381
        6.7747 -0.2908 -2.4247 5.8714 -0.0985 -2.2286 0.6377
        2.0776 0.0795 -1.1350 0.9033 -0.0636 -0.5514 0.9082
        """;

    /// <summary>Steps of the scale compared with their neighbours: 16 is about what a reader tells apart on a colour bar.</summary>
    private const int Steps = 16;

    [Fact]
    public void The_colour_difference_matches_the_standards_published_test_pairs()
    {
        var rows = StandardPairs.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries)
            .Select(l => l.Split(' ', StringSplitOptions.RemoveEmptyEntries).Select(v => double.Parse(v, CultureInfo.InvariantCulture)).ToArray())
            .ToList();
        Assert.Equal(34, rows.Count);
        foreach (var v in rows)
        {
            var p = new Colorimetry.Lab(v[0], v[1], v[2]);
            var q = new Colorimetry.Lab(v[3], v[4], v[5]);
            Assert.Equal(v[6], Colorimetry.DeltaE2000(p, q), 4);
            Assert.Equal(v[6], Colorimetry.DeltaE2000(q, p), 4);
        }
    }

    [Fact]
    public void Srgb_white_black_and_red_land_where_cielab_puts_them()
    {
        var white = Colorimetry.LabOf(255, 255, 255);
        Assert.Equal(100, white.L, 2);
        Assert.Equal(0, white.A, 1);
        Assert.Equal(0, white.B, 1);
        Assert.Equal(0, Colorimetry.LabOf(0, 0, 0).L, 6);
        // sRGB red is L* 53.24, a* 80.09, b* 67.20 (recalled from memory; a commonly quoted value).
        var red = Colorimetry.LabOf(255, 0, 0);
        Assert.Equal(53.24, red.L, 1);
        Assert.Equal(80.09, red.A, 0);
        Assert.Equal(67.20, red.B, 0);
    }

    private static (byte R, byte G, byte B)[] Sampled()
    {
        var table = ColorScales.HeatTable;
        return Enumerable.Range(0, Steps).Select(i => table[(int)Math.Round(i * 255.0 / (Steps - 1))]).Select(c => (c.R, c.G, c.B)).ToArray();
    }

    [Fact]
    public void Lightness_rises_at_every_entry_and_neighbouring_steps_differ_evenly()
    {
        var table = ColorScales.HeatTable;
        var all = table.Select(c => Colorimetry.LabOf(c.R, c.G, c.B)).ToArray();
        for (int i = 1; i < all.Length; i++)
            Assert.True(all[i].L > all[i - 1].L - 0.05, $"L* falls from entry {i - 1} ({all[i - 1].L:F2}) to {i} ({all[i].L:F2})");
        Assert.True(all[^1].L - all[0].L > 60, $"the scale spans only L* {all[0].L:F1} to {all[^1].L:F1}");

        var steps = Sampled().Select(c => Colorimetry.LabOf(c.R, c.G, c.B)).ToArray();
        var gaps = new double[Steps - 1];
        for (int i = 1; i < Steps; i++)
        {
            Assert.True(steps[i].L > steps[i - 1].L, $"L* does not rise from step {i - 1} to {i}");
            gaps[i - 1] = Colorimetry.DeltaE2000(steps[i - 1], steps[i]);
        }
        output.WriteLine("ΔE00 between neighbouring steps: " + string.Join(" ", gaps.Select(g => g.ToString("F1", CultureInfo.InvariantCulture))));
        // Common practice for a sequential scale: every step clearly visible (ΔE00 well above 2, about one just-noticeable
        // difference) and no step more than about twice another, so equal score steps look like similar steps.
        Assert.True(gaps.Min() >= 4, $"smallest step ΔE00 {gaps.Min():F2}");
        Assert.True(gaps.Max() / gaps.Min() <= 2.2, $"steps range from ΔE00 {gaps.Min():F2} to {gaps.Max():F2}");
    }

    [Theory]
    [InlineData("protanopia")]
    [InlineData("deuteranopia")]
    [InlineData("tritanopia")]
    public void Under_a_simulated_colour_vision_deficiency_lightness_still_rises_and_neighbours_stay_apart(string deficiency)
    {
        var matrix = Colorimetry.Deficiencies[deficiency];
        var steps = Sampled().Select(c => Colorimetry.SimulatedLab(c.R, c.G, c.B, matrix)).ToArray();
        var gaps = new double[Steps - 1];
        for (int i = 1; i < Steps; i++)
        {
            Assert.True(steps[i].L > steps[i - 1].L, $"{deficiency}: L* does not rise from step {i - 1} ({steps[i - 1].L:F2}) to {i} ({steps[i].L:F2})");
            gaps[i - 1] = Colorimetry.DeltaE2000(steps[i - 1], steps[i]);
        }
        output.WriteLine($"{deficiency}: ΔE00 between neighbours " + string.Join(" ", gaps.Select(g => g.ToString("F1", CultureInfo.InvariantCulture))));
        Assert.True(gaps.Min() >= 3, $"{deficiency}: smallest step ΔE00 {gaps.Min():F2}");
    }

    [Fact]
    public void The_scale_turns_from_green_through_blue_not_through_red_and_magenta()
    {
        // The hue path is what makes a scale recognisable: ours runs from green through teal and azure to violet,
        // where the familiar warm scales pass through magenta, red and orange. CIELAB hue of the middle steps:
        // 180°–300° is teal to blue-violet; the warm path's middle lies near 0°–60°.
        var steps = Sampled().Select(c => Colorimetry.LabOf(c.R, c.G, c.B)).ToArray();
        foreach (int i in new[] { 4, 6, 8, 10 })
            Assert.InRange(steps[i].HueDegrees, 180, 300);
        Assert.InRange(steps[1].HueDegrees, 120, 200); // green to teal at the dark end
        Assert.True(steps.All(s => s.HueDegrees is > 100 and < 350), "no step is red, orange or yellow");
    }

    [Fact]
    public void Page_gradient_stops_come_from_the_same_table()
    {
        var stops = ColorScales.HeatStops(5);
        var t = ColorScales.HeatTable;
        Assert.Equal($"#{t[0].R:x2}{t[0].G:x2}{t[0].B:x2}", stops[0]);
        Assert.Equal($"#{t[255].R:x2}{t[255].G:x2}{t[255].B:x2}", stops[4]);
    }
}
