using System.Globalization;

namespace Strayspot.Service.Hosting;

/// <summary>
/// The CPU time this process may use, from the container's CPU quota (cgroup v2 <c>cpu.max</c>, cgroup v1
/// <c>cpu.cfs_quota_us</c> / <c>cpu.cfs_period_us</c>) rather than the host's core count, and its split between
/// ONNX Runtime's intra-op threads and frames in flight. A quota caps CPU time, not cores: threads beyond it are
/// throttled together at the end of each period, so a frame spread over more threads than the quota gets slower.
/// </summary>
/// <param name="Cpus">CPUs' worth of time: min(quota/period over the process's cgroup and its parents, cores).</param>
/// <param name="Threads">Whole threads the budget pays for: ⌊Cpus⌋, at least 1 (half a CPU more only throttles).</param>
/// <param name="FramesInFlight">Frames worth scoring at once: 2 from 2 threads up (one frame's decoding, post-hoc
/// stages and HTTP overlap the other's network, and a network on fewer threads wastes less of them waiting), 1 on a
/// single thread. On 2 cores, 2 frames × 1 intra-op thread beat 1 frame × 2 threads at 2, 4 and 16 clients (README,
/// Benchmarks: <c>frame-settings</c>).</param>
/// <param name="IntraOpThreads">Threads for one inference: Threads / FramesInFlight, at least 1.</param>
/// <param name="Source">Where <paramref name="Cpus"/> came from, for the start-up log.</param>
public sealed record CpuBudget(double Cpus, int Threads, int FramesInFlight, int IntraOpThreads, string Source)
{
    private static readonly Lazy<CpuBudget> Detected = new(() => Detect("/sys/fs/cgroup", "/proc/self/cgroup", Environment.ProcessorCount));

    /// <summary>This process's budget, read once.</summary>
    public static CpuBudget Current => Detected.Value;

    /// <summary>The budget for <paramref name="cpus"/> CPUs' worth of time.</summary>
    public static CpuBudget Split(double cpus, string source)
    {
        int threads = Math.Max(1, (int)Math.Floor(cpus + 1e-9));
        int frames = threads >= 2 ? 2 : 1;
        return new CpuBudget(cpus, threads, frames, Math.Max(1, threads / frames), source);
    }

    /// <summary>
    /// Reads the quota under <paramref name="cgroupRoot"/> (normally <c>/sys/fs/cgroup</c>) for the groups named in
    /// <paramref name="selfCgroupFile"/> (normally <c>/proc/self/cgroup</c>). Missing or unreadable files mean no quota.
    /// </summary>
    public static CpuBudget Detect(string cgroupRoot, string selfCgroupFile, int cores)
    {
        cores = Math.Max(1, cores);
        double? quota = null;
        string source = $"{cores} cores, no CPU quota";
        try
        {
            var lines = File.Exists(selfCgroupFile) ? File.ReadAllLines(selfCgroupFile) : [];
            foreach (var line in lines)
            {
                // "hierarchy-id:controllers:path"; cgroup v2 has id 0 and no controllers.
                var parts = line.Split(':', 3);
                if (parts.Length != 3) continue;
                var controllers = parts[1].Split(',');
                if (parts[0] == "0" && parts[1].Length == 0)
                    Lowest(ref quota, ref source, GroupDirectories(cgroupRoot, parts[2]), V2Quota, "cgroup v2 cpu.max");
                else if (controllers.Contains("cpu"))
                    foreach (var mount in new[] { parts[1], "cpu", "cpu,cpuacct", "cpuacct,cpu" }.Distinct())
                        Lowest(ref quota, ref source, GroupDirectories(Path.Combine(cgroupRoot, mount), parts[2]), V1Quota, "cgroup v1 cpu.cfs_quota_us");
            }
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            source = $"{cores} cores; the cgroup files could not be read ({e.Message})";
        }
        if (quota is { } q && q < cores) return Split(q, source);
        return Split(cores, quota is null ? source : $"{cores} cores (the quota of {quota:0.##} CPUs is not lower)");
    }

    /// <summary>The group's folder and each parent up to the root: a parent's quota limits its children too.</summary>
    private static IEnumerable<string> GroupDirectories(string root, string path)
    {
        var dirs = new List<string> { root };
        string current = root;
        foreach (var part in path.Split('/', StringSplitOptions.RemoveEmptyEntries))
        {
            if (part is "." or "..") break;
            current = Path.Combine(current, part);
            dirs.Add(current);
        }
        return dirs;
    }

    private static void Lowest(ref double? quota, ref string source, IEnumerable<string> dirs, Func<string, double?> read, string what)
    {
        foreach (var dir in dirs)
            if (read(dir) is { } q && (quota is null || q < quota))
            {
                quota = q;
                source = $"{what} at {dir}: {q.ToString("0.##", CultureInfo.InvariantCulture)} CPUs";
            }
    }

    /// <summary>cgroup v2 <c>cpu.max</c>: "$MAX $PERIOD", MAX being "max" when unlimited.</summary>
    internal static double? V2Quota(string dir)
    {
        string file = Path.Combine(dir, "cpu.max");
        if (!File.Exists(file)) return null;
        var f = File.ReadAllText(file).Split((char[]?)null, StringSplitOptions.RemoveEmptyEntries);
        if (f.Length < 1 || f[0] == "max") return null;
        long period = f.Length > 1 ? ParseLong(f[1]) ?? 0 : 100_000;
        return ParseLong(f[0]) is { } max && max > 0 && period > 0 ? (double)max / period : null;
    }

    /// <summary>cgroup v1: <c>cpu.cfs_quota_us</c> (−1 when unlimited) over <c>cpu.cfs_period_us</c>.</summary>
    internal static double? V1Quota(string dir)
    {
        string q = Path.Combine(dir, "cpu.cfs_quota_us"), p = Path.Combine(dir, "cpu.cfs_period_us");
        if (!File.Exists(q) || !File.Exists(p)) return null;
        long? quota = ParseLong(File.ReadAllText(q)), period = ParseLong(File.ReadAllText(p));
        return quota > 0 && period > 0 ? (double)quota.Value / period.Value : null;
    }

    private static long? ParseLong(string s)
        => long.TryParse(s.Trim(), NumberStyles.AllowLeadingSign, CultureInfo.InvariantCulture, out long v) ? v : null;
}
