namespace Strayspot.Service.Demo;

/// <summary>
/// A scored demo frame against the ground truth the scene generator produced. A region is on debris when at least one
/// of its pixels is debris (mask value 1), false otherwise; a debris piece (an 8-connected component of debris pixels)
/// is found when a region covers at least one of its pixels. On an ordinary frame every region is false.
/// </summary>
public sealed record DemoFrameTally(int Regions, int OnDebris, int False, int Pieces, int PiecesFound)
{
    /// <param name="regionLabels">Region id per pixel (0 = none), ids 1..<paramref name="regionCount"/>.</param>
    /// <param name="debrisMask">0 normal, 1 debris, 255 ignore; null for a frame without debris.</param>
    public static DemoFrameTally Count(ReadOnlySpan<int> regionLabels, int regionCount, byte[]? debrisMask, int width, int height)
    {
        int n = width * height;
        if (regionLabels.Length != n) throw new ArgumentException($"Region labels hold {regionLabels.Length} pixels, expected {width}x{height}.");
        if (debrisMask is null) return new DemoFrameTally(regionCount, 0, regionCount, 0, 0);
        if (debrisMask.Length != n) throw new ArgumentException($"Debris mask holds {debrisMask.Length} pixels, expected {width}x{height}.");

        var onDebris = new bool[regionCount + 1];
        var piece = new int[n];
        var stack = new Stack<int>();
        int pieces = 0, found = 0;
        for (int start = 0; start < n; start++)
        {
            if (debrisMask[start] != ApronDebrisPainter.Anomaly || piece[start] != 0) continue;
            pieces++;
            bool hit = false;
            piece[start] = pieces;
            stack.Push(start);
            while (stack.Count > 0)
            {
                int p = stack.Pop();
                int region = regionLabels[p];
                if (region > 0) { onDebris[region] = true; hit = true; }
                int y = p / width, x = p % width;
                for (int dy = -1; dy <= 1; dy++)
                    for (int dx = -1; dx <= 1; dx++)
                    {
                        int yy = y + dy, xx = x + dx;
                        if ((uint)yy >= (uint)height || (uint)xx >= (uint)width) continue;
                        int q = yy * width + xx;
                        if (piece[q] != 0 || debrisMask[q] != ApronDebrisPainter.Anomaly) continue;
                        piece[q] = pieces;
                        stack.Push(q);
                    }
            }
            if (hit) found++;
        }
        int onDebrisCount = 0;
        for (int r = 1; r <= regionCount; r++) if (onDebris[r]) onDebrisCount++;
        return new DemoFrameTally(regionCount, onDebrisCount, regionCount - onDebrisCount, pieces, found);
    }
}
