using Strayspot.Scoring.Regions;

namespace Strayspot.Tests.Scoring.Regions;

public class RegionOutlineTests
{
    private static RegionSet Find(byte[] mask, int w, int h)
        => new RegionFinder().Find(mask, w, h, new float[w * h], new ushort[w * h], 1, new RegionFilter(1, null));

    [Fact]
    public void Square_is_traced_clockwise_from_its_first_pixel()
    {
        const int w = 7, h = 5;
        var mask = new byte[w * h];
        for (int y = 1; y <= 3; y++) for (int x = 2; x <= 4; x++) mask[y * w + x] = 1;
        var outline = RegionOutline.Outline(Find(mask, w, h), 1);
        Assert.Equal(new[] { (2, 1), (3, 1), (4, 1), (4, 2), (4, 3), (3, 3), (2, 3), (2, 2) }, outline);
    }

    [Fact]
    public void Lone_pixel_and_thin_diagonal()
    {
        var lone = RegionOutline.Outline(Find(new byte[] { 0, 0, 0, 0, 1, 0 }, 3, 2), 1);
        Assert.Equal(new[] { (1, 1) }, lone);

        // A diagonal chain is walked down and back up.
        const int w = 4;
        var mask = new byte[w * w];
        for (int i = 0; i < w; i++) mask[i * w + i] = 1;
        Assert.Equal(new[] { (0, 0), (1, 1), (2, 2), (3, 3), (2, 2), (1, 1) }, RegionOutline.Outline(Find(mask, w, w), 1));
    }

    [Theory]
    [InlineData(1.5)]
    [InlineData(4.2)]
    [InlineData(9.7)]
    public void Disc_outline_is_exactly_its_border_pixels_in_a_closed_chain(double radius)
    {
        const int w = 30, h = 26;
        var mask = new byte[w * h];
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
                if ((x - 13.3) * (x - 13.3) + (y - 12.1) * (y - 12.1) <= radius * radius) mask[y * w + x] = 1;
        var set = Find(mask, w, h);
        var outline = RegionOutline.Outline(set, 1);

        bool In(int x, int y) => x >= 0 && y >= 0 && x < w && y < h && mask[y * w + x] == 1;
        var border = new HashSet<(int, int)>();
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
                if (In(x, y) && (!In(x - 1, y) || !In(x + 1, y) || !In(x, y - 1) || !In(x, y + 1))) border.Add((x, y));
        Assert.True(border.SetEquals(outline));
        Assert.Equal(border.Count, outline.Count); // a disc's border is passed once
        for (int i = 0; i < outline.Count; i++)
        {
            var (ax, ay) = outline[i];
            var (bx, by) = outline[(i + 1) % outline.Count];
            Assert.True(Math.Max(Math.Abs(ax - bx), Math.Abs(ay - by)) == 1, $"{outline[i]} → {outline[(i + 1) % outline.Count]}");
        }
    }

    [Theory]
    [InlineData(1, 0.5)]
    [InlineData(2, 0.6)]
    [InlineData(3, 0.4)]
    public void Random_regions_give_closed_chains_of_their_own_pixels(int seed, double density)
    {
        const int w = 40, h = 30;
        var rng = new Random(seed);
        var mask = new byte[w * h];
        for (int i = 0; i < mask.Length; i++) mask[i] = (byte)(rng.NextDouble() < density ? 1 : 0);
        var set = Find(mask, w, h);
        foreach (var r in set.Regions)
        {
            var outline = RegionOutline.Outline(set, r.Id);
            Assert.Equal((set.Labels.Slice(r.Top * w).IndexOf(r.Id), r.Top), outline[0]);
            Assert.True(outline.Count <= 4 * r.Area, $"region {r.Id}: {outline.Count} points for area {r.Area}");
            for (int i = 0; i < outline.Count; i++)
            {
                var (ax, ay) = outline[i];
                Assert.Equal(r.Id, set.Labels[ay * w + ax]);
                var (bx, by) = outline[(i + 1) % outline.Count];
                if (outline.Count > 1) Assert.Equal(1, Math.Max(Math.Abs(ax - bx), Math.Abs(ay - by)));
            }
            // The outline reaches every side of the bounding box.
            Assert.Contains(outline, p => p.X == r.Left);
            Assert.Contains(outline, p => p.X == r.Left + r.Width - 1);
            Assert.Contains(outline, p => p.Y == r.Top + r.Height - 1);
        }
    }
}
