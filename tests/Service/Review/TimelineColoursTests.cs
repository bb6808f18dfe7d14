using System.Globalization;
using System.Text.RegularExpressions;
using Strayspot.Service.Review;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Review;

/// <summary>
/// The timeline's track bars tell their decision by fill colour (a false alarm also by its dashed outline): the fills
/// are read from the page's own stylesheet and must stay apart by CIEDE2000 (CIE 142-2001) under normal vision and
/// under the protanopia, deuteranopia and tritanopia simulations, and stand off the lane behind them.
/// </summary>
public sealed class TimelineColoursTests
{
    /// <summary>A difference a reviewer sees at a glance on small bars; 10 is a common-practice figure, not a standard.</summary>
    private const double Apart = 10;

    private static string Css()
    {
        using var stream = typeof(ReviewPage).Assembly.GetManifestResourceStream("review/review.css")!;
        return new StreamReader(stream).ReadToEnd();
    }

    private static (byte R, byte G, byte B) Fill(string css, string selector)
    {
        string? Var(string name) => Regex.Match(css, "--" + name + @":\s*(#[0-9a-fA-F]{6})").Groups[1].Value is { Length: 7 } v ? v : null;
        var rule = Regex.Match(css, Regex.Escape(selector) + @"\s*\{[^}]*?fill:\s*(#[0-9a-fA-F]{6}|var\(--([a-z-]+)\))");
        Assert.True(rule.Success, $"no fill for {selector}");
        string hex = rule.Groups[2].Success && rule.Groups[2].Value.Length > 0 ? Var(rule.Groups[2].Value)! : rule.Groups[1].Value;
        int v = int.Parse(hex[1..], NumberStyles.HexNumber, CultureInfo.InvariantCulture);
        return ((byte)(v >> 16), (byte)(v >> 8), (byte)v);
    }

    [Fact]
    public void Track_bar_fills_stay_apart_for_every_vision_and_off_their_lane()
    {
        string css = Css();
        var fills = new Dictionary<string, (byte R, byte G, byte B)>
        {
            ["undecided"] = Fill(css, ".timeline .track-bar "),
            ["label-it"] = Fill(css, ".timeline .track-bar.label-it"),
            ["false-alarm"] = Fill(css, ".timeline .track-bar.false-alarm"),
            ["unsure"] = Fill(css, ".timeline .track-bar.unsure"),
        };
        var lane = Fill(css, ".timeline .lane-band");
        var visions = new Dictionary<string, Func<(byte R, byte G, byte B), Colorimetry.Lab>> { ["normal"] = c => Colorimetry.LabOf(c.R, c.G, c.B) };
        foreach (var (name, m) in Colorimetry.Deficiencies) visions[name] = c => Colorimetry.SimulatedLab(c.R, c.G, c.B, m);
        var names = fills.Keys.ToList();
        foreach (var (vision, lab) in visions)
        {
            for (int i = 0; i < names.Count; i++)
            {
                for (int j = i + 1; j < names.Count; j++)
                {
                    double d = Colorimetry.DeltaE2000(lab(fills[names[i]]), lab(fills[names[j]]));
                    Assert.True(d >= Apart, $"{vision}: {names[i]} and {names[j]} are only ΔE00 {d:F1} apart");
                }
                // The false-alarm bar is white with a dashed outline: it stands off the lane by its outline, the others by their fill.
                if (names[i] == "false-alarm") continue;
                double off = Colorimetry.DeltaE2000(lab(fills[names[i]]), lab(lane));
                Assert.True(off >= 2 * Apart, $"{vision}: {names[i]} is only ΔE00 {off:F1} off the lane");
            }
        }
    }
}
