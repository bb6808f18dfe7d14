using FsCheck;
using FsCheck.Xunit;
using Strayspot.Scoring.Regions;

namespace Strayspot.Tests.Scoring.Regions;

public class RegionPropertyTests
{
    private static float[] Scores(int seed, int n)
    {
        var rng = new Random(seed);
        var s = new float[n];
        for (int i = 0; i < n; i++) s[i] = (float)(rng.NextDouble() * 4 - 2);
        return s;
    }

    [Property(MaxTest = 200)]
    public bool Higher_threshold_never_grows_the_mask(int seed, PositiveInt length, float low, NonNegativeInt step)
    {
        if (!float.IsFinite(low)) return true;
        low = Math.Clamp(low, -3f, 3f);
        float high = low + step.Get * 0.01f;
        var score = Scores(seed, length.Get % 5000 + 1);
        var a = new byte[score.Length];
        var b = new byte[score.Length];
        int na = AnomalyMask.Threshold(score, low, a), nb = AnomalyMask.Threshold(score, high, b);
        for (int i = 0; i < score.Length; i++)
        {
            if (b[i] > a[i]) return false;
            if (a[i] != (score[i] > low ? 1 : 0)) return false; // strictly above, and only 0/1
        }
        return nb <= na && na == a.Count(x => x == 1) && nb == b.Count(x => x == 1);
    }

    [Property(MaxTest = 150)]
    public bool Regions_partition_the_mask(int seed, PositiveInt wGen, PositiveInt hGen, float threshold)
    {
        if (!float.IsFinite(threshold)) return true;
        int w = wGen.Get % 90 + 1, h = hGen.Get % 70 + 1;
        var score = Scores(seed, w * h);
        var mask = new byte[w * h];
        int count = AnomalyMask.Threshold(score, Math.Clamp(threshold, -2.5f, 2.5f), mask);
        var set = new RegionFinder().Find(mask, w, h, score, new ushort[w * h], 1, new RegionFilter(1, null));

        var pixelsPerId = new long[set.Regions.Count + 1];
        var labels = set.Labels;
        for (int i = 0; i < w * h; i++)
        {
            if ((labels[i] != 0) != (mask[i] == 1)) return false;
            pixelsPerId[labels[i]]++;
        }
        long sum = 0;
        for (int k = 0; k < set.Regions.Count; k++)
        {
            var r = set.Regions[k];
            if (r.Id != k + 1 || r.Area != pixelsPerId[r.Id]) return false;
            sum += r.Area;
        }
        return sum == count && set.ComponentsFound == set.Regions.Count && set.DroppedByArea == 0;
    }

    [Property(MaxTest = 200)]
    public bool Threshold_count_matches_a_plain_loop_on_large_frames(int seed, float threshold)
    {
        if (!float.IsFinite(threshold)) return true;
        var score = Scores(seed, 300_001); // above the parallel threshold, with an odd tail
        var mask = new byte[score.Length];
        float t = Math.Clamp(threshold, -2.5f, 2.5f);
        int n = AnomalyMask.Threshold(score, t, mask);
        int expected = 0;
        for (int i = 0; i < score.Length; i++)
        {
            if (mask[i] != (score[i] > t ? 1 : 0)) return false;
            expected += mask[i];
        }
        return n == expected;
    }
}
