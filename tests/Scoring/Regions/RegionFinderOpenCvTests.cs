using OpenCvSharp;
using Strayspot.Scoring.Regions;

namespace Strayspot.Tests.Scoring.Regions;

/// <summary>Outside reference: OpenCV connectedComponentsWithStats, connectivity 8 (through OpenCvSharp4).</summary>
public class RegionFinderOpenCvTests
{
    public static TheoryData<int, int, double> Cases => new()
    {
        { 1, 1, 1.0 }, { 1, 1, 0.0 }, { 1, 60, 0.5 }, { 60, 1, 0.5 }, { 7, 5, 0.3 }, { 64, 48, 0.05 },
        { 64, 48, 0.3 }, { 64, 48, 0.6 }, { 120, 90, 0.45 }, { 200, 150, 0.02 }, { 333, 211, 0.5 }, { 50, 50, 0.95 },
    };

    [Theory]
    [MemberData(nameof(Cases))]
    public void Components_match_OpenCV_connectedComponentsWithStats(int w, int h, double density)
    {
        var rng = new Random(w * 131 + h * 17 + (int)(density * 100));
        // Half of the cases use blobs (connected shapes), half independent pixels (many tiny components).
        var mask = new byte[w * h];
        bool blobs = rng.Next(2) == 0;
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
                mask[y * w + x] = (byte)((blobs ? Math.Sin(x * 0.31 + rng.NextDouble() * 0.4) * Math.Cos(y * 0.23) * 0.5 + 0.5 : rng.NextDouble()) < density ? 1 : 0);
        var score = new float[w * h];
        for (int i = 0; i < score.Length; i++) score[i] = (float)rng.NextDouble();
        var cls = new ushort[w * h];

        var set = new RegionFinder().Find(mask, w, h, score, cls, 1, new RegionFilter(1, null));

        using var src = Mat.FromPixelData(h, w, MatType.CV_8UC1, mask);
        using var labels = new Mat();
        using var stats = new Mat();
        using var centroids = new Mat();
        int n = Cv2.ConnectedComponentsWithStats(src, labels, stats, centroids, PixelConnectivity.Connectivity8, MatType.CV_32S);
        Assert.Equal(n - 1, set.ComponentsFound);
        Assert.Equal(n - 1, set.Regions.Count);

        labels.GetArray(out int[] cvLabels);
        var ours = set.Labels;
        var cvOfOurs = new int[set.Regions.Count + 1];
        var oursOfCv = new int[n];
        for (int i = 0; i < w * h; i++)
        {
            int a = ours[i], b = cvLabels[i];
            Assert.Equal(a == 0, b == 0);
            if (a == 0) continue;
            if (cvOfOurs[a] == 0) cvOfOurs[a] = b;
            if (oursOfCv[b] == 0) oursOfCv[b] = a;
            Assert.Equal(cvOfOurs[a], b); // one of our regions is one OpenCV component and vice versa
            Assert.Equal(oursOfCv[b], a);
        }
        foreach (var r in set.Regions)
        {
            int b = cvOfOurs[r.Id];
            Assert.Equal(stats.At<int>(b, (int)ConnectedComponentsTypes.Left), r.Left);
            Assert.Equal(stats.At<int>(b, (int)ConnectedComponentsTypes.Top), r.Top);
            Assert.Equal(stats.At<int>(b, (int)ConnectedComponentsTypes.Width), r.Width);
            Assert.Equal(stats.At<int>(b, (int)ConnectedComponentsTypes.Height), r.Height);
            Assert.Equal(stats.At<int>(b, (int)ConnectedComponentsTypes.Area), r.Area);
            Assert.Equal(centroids.At<double>(b, 0), r.CentroidX, 1e-9);
            Assert.Equal(centroids.At<double>(b, 1), r.CentroidY, 1e-9);
        }
    }
}
