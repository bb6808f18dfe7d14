namespace Strayspot.Service.Demo;

/// <summary>One debris object of a drive-by, in panorama pixels (box inclusive of its ignore ring).</summary>
public sealed record DriveByObject(int Id, int Left, int Top, int Right, int Bottom, long Area);

/// <summary>
/// Our demo recording: one wide apron scene with debris painted in, seen through a camera window that slides along
/// it frame by frame (a vehicle driving past), so objects come into view at one edge and leave at the other.
/// Frame i shows panorama columns <c>i·Step … i·Step + FrameWidth − 1</c> at <c>i / FrameRate</c> seconds.
/// Deterministic in the seed; invented data for the demo and tests only.
/// </summary>
public sealed class ApronDriveBy
{
    private readonly ApronDebrisFrame _scene;
    private readonly int[] _objectOf;

    public ApronDriveBy(int frameWidth = 512, int frameHeight = 512, int panoramaWidth = 1536, int step = 16,
        double frameRate = 10, int seed = 2026, int debris = 4)
    {
        if (frameWidth > panoramaWidth || step < 1 || frameRate <= 0)
            throw new ArgumentOutOfRangeException(nameof(step), "The window must fit the panorama and move forward.");
        FrameWidth = frameWidth; FrameHeight = frameHeight; PanoramaWidth = panoramaWidth; Step = step; FrameRate = frameRate;
        var scene = new ApronSceneGenerator(panoramaWidth, frameHeight).Render(seed);
        _scene = ApronDebrisPainter.Paint(scene, seed + 7919, debris);
        (_objectOf, Objects) = LabelObjects(_scene.AnomalyMask, panoramaWidth, frameHeight);
    }

    public int FrameWidth { get; }
    public int FrameHeight { get; }
    public int PanoramaWidth { get; }
    public int Step { get; }
    public double FrameRate { get; }
    public int FrameCount => (PanoramaWidth - FrameWidth) / Step + 1;
    public IReadOnlyList<DriveByObject> Objects { get; }

    /// <summary>Panorama column of frame <paramref name="index"/>'s left edge.</summary>
    public int Offset(long index) => (int)(index * Step);

    /// <summary>Frame <paramref name="index"/> as RGB bytes, row-major.</summary>
    public byte[] Rgb(int index)
    {
        var rgb = new byte[FrameWidth * FrameHeight * 3];
        int off = Offset(index);
        for (int y = 0; y < FrameHeight; y++)
            Array.Copy(_scene.Frame.Rgb, (y * PanoramaWidth + off) * 3, rgb, y * FrameWidth * 3, FrameWidth * 3);
        return rgb;
    }

    /// <summary>The object under panorama pixel (x, y), counting its ignore ring; 0 for none.</summary>
    public int ObjectAt(int x, int y) =>
        x < 0 || y < 0 || x >= PanoramaWidth || y >= FrameHeight ? 0 : _objectOf[y * PanoramaWidth + x];

    /// <summary>Pixels of object <paramref name="id"/> inside frame <paramref name="index"/>.</summary>
    public long VisiblePixels(int id, long index)
    {
        var o = Objects[id - 1];
        int off = Offset(index);
        long n = 0;
        for (int y = o.Top; y <= o.Bottom; y++)
            for (int x = Math.Max(o.Left, off); x <= Math.Min(o.Right, off + FrameWidth - 1); x++)
                if (_objectOf[y * PanoramaWidth + x] == id) n++;
        return n;
    }

    // Debris pixels and their rings, 8-connected, numbered in raster order of first pixel.
    private static (int[] ObjectOf, IReadOnlyList<DriveByObject> Objects) LabelObjects(byte[] mask, int w, int h)
    {
        var ids = new int[w * h];
        var objects = new List<DriveByObject>();
        var stack = new Stack<int>();
        for (int start = 0; start < mask.Length; start++)
        {
            if (mask[start] == ApronDebrisPainter.Normal || ids[start] != 0) continue;
            int id = objects.Count + 1;
            int left = int.MaxValue, top = int.MaxValue, right = -1, bottom = -1;
            long area = 0;
            ids[start] = id;
            stack.Push(start);
            while (stack.Count > 0)
            {
                int p = stack.Pop();
                int px = p % w, py = p / w;
                area++;
                left = Math.Min(left, px); right = Math.Max(right, px); top = Math.Min(top, py); bottom = Math.Max(bottom, py);
                for (int dy = -1; dy <= 1; dy++)
                    for (int dx = -1; dx <= 1; dx++)
                    {
                        int x = px + dx, y = py + dy;
                        if (x < 0 || y < 0 || x >= w || y >= h) continue;
                        int q = y * w + x;
                        if (mask[q] == ApronDebrisPainter.Normal || ids[q] != 0) continue;
                        ids[q] = id;
                        stack.Push(q);
                    }
            }
            objects.Add(new DriveByObject(id, left, top, right, bottom, area));
        }
        return (ids, objects);
    }
}
