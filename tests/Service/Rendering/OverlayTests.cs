using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Regions;
using Strayspot.Service.Rendering;

namespace Strayspot.Tests.Service.Rendering;

public sealed class OverlayTests
{
    private static Region Box(int id, int left, int top, int w, int h, float max) =>
        new(id, left, top, w, h, w * h, 0, left + w / 2.0, top + h / 2.0, max, max, 0, 1, true);

    [Fact]
    public void The_heat_map_gives_one_score_one_colour_in_every_frame()
    {
        // Two frames with very different ranges: on the fixed scale the shared score 2.5 gets the same colour in both.
        float[] quiet = [0f, 1f, 2.5f, 2.6f];
        float[] busy = [-5f, 2.5f, 9f, 12f];
        var scale = HeatScale.Fixed(ScoreMethod.Sml, 2f);
        using var a = ArtifactRenderer.HeatMap(quiet, 4, 1, scale);
        using var b = ArtifactRenderer.HeatMap(busy, 4, 1, scale);
        Assert.Equal(a[2, 0], b[1, 0]);
        // Stretched to each frame's range the same score comes out differently: that is the option, not the default.
        using var c = ArtifactRenderer.HeatMap(quiet, 4, 1, HeatScale.OfFrame(quiet, 2f));
        using var d = ArtifactRenderer.HeatMap(busy, 4, 1, HeatScale.OfFrame(busy, 2f));
        Assert.NotEqual(c[2, 0], d[1, 0]);
    }

    [Theory]
    [InlineData(ScoreMethod.Sml, 2.6f, -1.4f, 4.6f)]
    [InlineData(ScoreMethod.MaxLogit, -3f, -7f, -1f)]
    [InlineData(ScoreMethod.Msp, -0.8f, -1.2f, -0.6f)]
    [InlineData(ScoreMethod.Entropy, 1f, 0f, 1.5f)]
    public void The_fixed_scale_runs_four_units_below_the_threshold_to_two_above(ScoreMethod method, float threshold, float low, float high)
    {
        var s = HeatScale.Fixed(method, threshold);
        Assert.Equal(low, s.Low, 4);
        Assert.Equal(high, s.High, 4);
        Assert.Equal(2.0 / 3.0, s.PositionOf(threshold), 4);
    }

    [Fact]
    public void Numbers_of_crowded_regions_never_overlap_and_stay_inside_the_frame()
    {
        // Twenty small regions packed in a row, as on a vehicle edge: every tag finds its own spot.
        var regions = Enumerable.Range(1, 20).Select(i => Box(i, 100 + i * 6, 100 + (i % 3) * 4, 4, 4, i)).ToList();
        var labels = RegionLabels.Place(regions, 400, 300, glyphScale: 2, padding: 3);
        Assert.Equal(regions.Select(r => r.Id), labels.Select(l => l.RegionId));
        for (int i = 0; i < labels.Count; i++)
        {
            var p = labels[i];
            Assert.InRange(p.X, 0, 400 - p.Width);
            Assert.InRange(p.Y, 0, 300 - p.Height);
            for (int j = i + 1; j < labels.Count; j++)
            {
                var q = labels[j];
                bool overlap = p.X < q.X + q.Width && q.X < p.X + p.Width && p.Y < q.Y + q.Height && q.Y < p.Y + p.Height;
                Assert.False(overlap, $"tags {p.RegionId} and {q.RegionId} overlap");
            }
        }
        Assert.Contains(labels, l => l.LeaderTo is not null); // the crowd pushed some tags out, joined by a line
        // The highest-scoring region chose first and sits against its box.
        Assert.Null(labels.Single(l => l.RegionId == 20).LeaderTo);
    }

    [Fact]
    public void The_overlay_is_the_frame_plus_a_legend_strip_with_boxes_and_the_threshold_marked()
    {
        const int w = 256, h = 128;
        using var frame = new Image<Rgb24>(w, h, new Rgb24(200, 170, 90)); // tan, where a pale fill used to vanish
        var score = new float[w * h];
        var mask = new byte[w * h];
        for (int y = 40; y < 60; y++)
        for (int x = 100; x < 130; x++) { score[y * w + x] = 3.5f; mask[y * w + x] = 1; }
        var regions = new[] { Box(1, 100, 40, 30, 20, 3.5f) };
        var scale = HeatScale.Fixed(ScoreMethod.Sml, 2.6f);
        using var overlay = OverlayRenderer.Render(frame, score, mask, regions, scale);

        Assert.Equal(w, overlay.Width);
        Assert.Equal(h + OverlayRenderer.StripHeight(OverlayRenderer.GlyphScaleFor(w, h)), overlay.Height);
        // Double lines: light on the mask's border pixel, dark just outside it; the box two pixels off the region likewise.
        Assert.Equal(new Rgb24(255, 255, 255), overlay[100, 50]);
        Assert.Equal(new Rgb24(16, 18, 20), overlay[99, 50]);
        Assert.Equal(new Rgb24(255, 255, 255), overlay[98 - 0, 38]);
        Assert.Equal(new Rgb24(16, 18, 20), overlay[97, 37]);
        // Inside, the fill is the frame blended with the score's heat colour.
        var heat = ColorScales.HeatTable[scale.IndexOf(3.5f)];
        var inside = overlay[115, 50];
        Assert.Equal((byte)(200 + (heat.R - 200) * 0.5f), inside.R);
        // Untouched frame elsewhere.
        Assert.Equal(new Rgb24(200, 170, 90), overlay[10, 100]);
        // The strip holds every heat colour along its bar and a light threshold line two thirds along it.
        var stripRow = Enumerable.Range(0, w).Select(x => overlay[x, h + 2 * OverlayRenderer.GlyphScaleFor(w, h) + 4]).ToList();
        Assert.Contains(ColorScales.HeatTable[0], stripRow);
        Assert.Contains(ColorScales.HeatTable[255], stripRow);
        int firstHeat = stripRow.IndexOf(ColorScales.HeatTable[0]), lastHeat = stripRow.LastIndexOf(ColorScales.HeatTable[255]);
        int marker = stripRow.FindIndex(firstHeat, p => p.Equals(new Rgb24(255, 255, 255)));
        Assert.InRange((marker - firstHeat) / (double)(lastHeat - firstHeat), 0.6, 0.72);
    }

    [Fact]
    public void The_pixel_font_draws_every_character_the_legend_uses()
    {
        foreach (char c in "ANOMALY SCORE FIXED SCALE THIS FRAMES RANGE THRESHOLD REGIONS 0123456789.-")
            Assert.True(PixelFont.CanDraw(c), $"no glyph for '{c}'");
        var pixels = new Rgb24[40 * 9];
        PixelFont.Draw(pixels, 40, 9, "18", 1, 1, 1, new Rgb24(255, 255, 255));
        Assert.True(pixels.Count(p => p.R == 255) > 15, "the digits left no ink");
        Assert.Equal(11, PixelFont.Measure("18", 1));
    }
}
