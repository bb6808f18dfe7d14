using Strayspot.Scoring.Regions;

namespace Strayspot.Service.Rendering;

/// <summary>Where one region's number goes: its tag box and, when the tag had to move away, the box point its leader line reaches.</summary>
public readonly record struct RegionLabel(int RegionId, int X, int Y, int Width, int Height, (int X, int Y)? LeaderTo);

/// <summary>
/// Places region numbers so no two overlap: each tag tries the spots hugging its region's box first, then rings
/// further out (joined to the box by a leader line). Higher-scoring regions choose first, so their numbers sit closest.
/// </summary>
public static class RegionLabels
{
    public static List<RegionLabel> Place(IReadOnlyList<Region> regions, int width, int height, int glyphScale, int padding)
    {
        var placed = new List<RegionLabel>(regions.Count);
        var order = new List<Region>(regions);
        order.Sort((a, b) => b.MaxScore.CompareTo(a.MaxScore) is var c && c != 0 ? c : a.Id.CompareTo(b.Id));
        foreach (var r in order)
        {
            string text = r.Id.ToString(System.Globalization.CultureInfo.InvariantCulture);
            int w = PixelFont.Measure(text, glyphScale) + 2 * padding, h = PixelFont.Height(glyphScale) + 2 * padding;
            RegionLabel? best = null;
            int bestCost = int.MaxValue;
            foreach (var (x, y, adjacent) in Candidates(r, w, h, width, height))
            {
                if (x < 0 || y < 0 || x + w > width || y + h > height) continue;
                if (Collides(placed, x, y, w, h)) continue;
                int cost = CoveredBoxes(regions, r.Id, x, y, w, h) * 4 + (adjacent ? 0 : 1);
                if (cost < bestCost)
                {
                    bestCost = cost;
                    best = new RegionLabel(r.Id, x, y, w, h, adjacent ? null : NearestBoxPoint(r, x + w / 2, y + h / 2));
                    if (cost == 0) break;
                }
            }
            // A frame so crowded that every spot is taken: the tag goes on the box's corner, clipped to the frame.
            best ??= new RegionLabel(r.Id, Math.Clamp(r.Left, 0, Math.Max(0, width - w)), Math.Clamp(r.Top, 0, Math.Max(0, height - h)), w, h, null);
            placed.Add(best.Value);
        }
        placed.Sort((a, b) => a.RegionId.CompareTo(b.RegionId));
        return placed;
    }

    private static IEnumerable<(int X, int Y, bool Adjacent)> Candidates(Region r, int w, int h, int width, int height)
    {
        int left = r.Left - 2, top = r.Top - 2, right = r.Left + r.Width + 1, bottom = r.Top + r.Height + 1;
        // Hugging the box: above, below, then beside it.
        yield return (left, top - h, true);
        yield return (right - w + 1, top - h, true);
        yield return (left, bottom + 1, true);
        yield return (right - w + 1, bottom + 1, true);
        yield return (right + 1, top, true);
        yield return (left - w, top, true);
        yield return (right + 1, bottom - h + 1, true);
        yield return (left - w, bottom - h + 1, true);
        // Rings around the box's centre, eight directions each, further out each ring.
        int cx = r.Left + r.Width / 2, cy = r.Top + r.Height / 2;
        int step = Math.Max(w, h) + 2;
        for (int ring = 1; ring <= 8; ring++)
        {
            int dx = r.Width / 2 + 2 + ring * step, dy = r.Height / 2 + 2 + ring * (h + 2);
            foreach (var (sx, sy) in Directions)
            {
                int x = cx + sx * dx - w / 2, y = cy + sy * dy - h / 2;
                yield return (Math.Clamp(x, 0, Math.Max(0, width - w)), Math.Clamp(y, 0, Math.Max(0, height - h)), false);
            }
        }
    }

    private static readonly (int, int)[] Directions = [(0, -1), (1, -1), (1, 0), (1, 1), (0, 1), (-1, 1), (-1, 0), (-1, -1)];

    private static bool Collides(List<RegionLabel> placed, int x, int y, int w, int h)
    {
        foreach (var p in placed)
            if (x < p.X + p.Width + 1 && p.X < x + w + 1 && y < p.Y + p.Height + 1 && p.Y < y + h + 1) return true;
        return false;
    }

    private static int CoveredBoxes(IReadOnlyList<Region> regions, int own, int x, int y, int w, int h)
    {
        int n = 0;
        foreach (var r in regions)
            if (x < r.Left + r.Width + 2 && r.Left - 2 < x + w && y < r.Top + r.Height + 2 && r.Top - 2 < y + h) n++;
        return n;
    }

    private static (int X, int Y) NearestBoxPoint(Region r, int x, int y) =>
        (Math.Clamp(x, r.Left - 2, r.Left + r.Width + 1), Math.Clamp(y, r.Top - 2, r.Top + r.Height + 1));
}
