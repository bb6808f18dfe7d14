using System.Diagnostics;

namespace Strayspot.Bench;

public static class Measure
{
    public static double Median(List<double> values)
    {
        var sorted = values.OrderBy(v => v).ToList();
        int n = sorted.Count;
        return n % 2 == 1 ? sorted[n / 2] : (sorted[n / 2 - 1] + sorted[n / 2]) / 2;
    }

    /// <summary>Median wall time in milliseconds of <paramref name="runs"/> calls after two warm-up calls.</summary>
    public static double MedianMs(int runs, Action action)
    {
        action(); action();
        var times = new List<double>(runs);
        for (int i = 0; i < runs; i++)
        {
            long t = Stopwatch.GetTimestamp();
            action();
            times.Add(Stopwatch.GetElapsedTime(t).TotalMilliseconds);
        }
        return Median(times);
    }

    /// <summary>Bytes allocated on all threads per call, in steady state.</summary>
    public static double AllocatedBytesPerCall(int calls, Action action)
    {
        action();
        long before = GC.GetTotalAllocatedBytes(precise: true);
        for (int i = 0; i < calls; i++) action();
        return (GC.GetTotalAllocatedBytes(precise: true) - before) / (double)calls;
    }
}
