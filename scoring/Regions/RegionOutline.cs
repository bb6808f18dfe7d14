namespace Strayspot.Scoring.Regions;

/// <summary>The outer boundary of a region as a polygon, for manifests and overlays.</summary>
public static class RegionOutline
{
    // Clockwise on screen (y grows downwards), starting west.
    private static readonly (int X, int Y)[] Ring = [(-1, 0), (-1, -1), (0, -1), (1, -1), (1, 0), (1, 1), (0, 1), (-1, 1)];

    /// <summary>
    /// The region's outer boundary pixels in clockwise order, starting at its first pixel in raster order
    /// (Moore-neighbour tracing; stops when it would leave the start pixel the way it first did). A pixel is listed again
    /// when the boundary passes it twice (thin parts); holes are not traced. One pixel: a one-point polygon.
    /// </summary>
    public static List<(int X, int Y)> Outline(RegionSet set, int regionId)
    {
        ArgumentNullException.ThrowIfNull(set);
        if (regionId < 1 || regionId > set.Regions.Count)
            throw new ArgumentOutOfRangeException(nameof(regionId), regionId, $"The set has regions 1..{set.Regions.Count}.");
        var region = set.Regions[regionId - 1];
        int w = set.Width, h = set.Height;
        bool Inside(int x, int y) => x >= 0 && y >= 0 && x < w && y < h && set.Labels[y * w + x] == regionId;

        int sx = region.Left;
        while (!Inside(sx, region.Top)) sx++;
        var start = (X: sx, Y: region.Top);
        var outline = new List<(int X, int Y)> { start };

        // Entered from the west: nothing of the region lies left of, or above, its raster-first pixel.
        var c = start;
        int from = 0;
        (int X, int Y)? firstStep = null;
        long guard = 4 * region.Area + 8;
        while (guard-- > 0)
        {
            int k = 1;
            for (; k <= 8; k++)
            {
                var (dx, dy) = Ring[(from + k) % 8];
                if (Inside(c.X + dx, c.Y + dy)) break;
            }
            if (k > 8) return outline; // a lone pixel
            var step = Ring[(from + k) % 8];
            var back = Ring[(from + k - 1) % 8];
            var next = (X: c.X + step.X, Y: c.Y + step.Y);
            // Leaving the start towards the same pixel as the first time: from here on the walk repeats itself
            // (the backtrack of that pixel is the same outside neighbour again).
            if (c == start && firstStep == next) break;
            firstStep ??= next;
            // The last outside neighbour looked at becomes the next pixel's backtrack direction.
            from = Array.IndexOf(Ring, (c.X + back.X - next.X, c.Y + back.Y - next.Y));
            outline.Add(next);
            c = next;
        }
        if (outline.Count > 1 && outline[^1] == start) outline.RemoveAt(outline.Count - 1);
        return outline;
    }
}
