using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Hosting;

/// <summary>
/// The CPU budget read from sample cgroup files laid out as the Linux kernel's cgroup documentation describes them
/// (cgroup v2: <c>cpu.max</c> holds "$MAX $PERIOD" or "max $PERIOD"; cgroup v1: <c>cpu.cfs_quota_us</c>, −1 when
/// unlimited, and <c>cpu.cfs_period_us</c>; <c>/proc/self/cgroup</c> lines are "id:controllers:path").
/// </summary>
public sealed class CpuBudgetTests : IDisposable
{
    private readonly string _root = Directory.CreateTempSubdirectory("strayspot-cgroup-").FullName;

    public void Dispose() => Directory.Delete(_root, recursive: true);

    private string Write(string relative, string text)
    {
        string path = Path.Combine(_root, relative);
        Directory.CreateDirectory(Path.GetDirectoryName(path)!);
        File.WriteAllText(path, text);
        return path;
    }

    private CpuBudget Detect(string selfCgroup, int cores)
        => CpuBudget.Detect(Path.Combine(_root, "fs"), Write("self-cgroup", selfCgroup), cores);

    [Fact]
    public void Cgroup_v2_quota_of_one_and_a_half_CPUs_on_a_16_core_host_gives_one_thread()
    {
        Write("fs/cpu.max", "150000 100000\n");
        var b = Detect("0::/\n", cores: 16);
        Assert.Equal(1.5, b.Cpus, 9);
        Assert.Equal(1, b.Threads);
        Assert.Equal(1, b.IntraOpThreads);
        Assert.Equal(1, b.FramesInFlight);
        Assert.Contains("cgroup v2", b.Source);
    }

    [Fact]
    public void Cgroup_v2_takes_the_lowest_quota_of_the_group_and_its_parents()
    {
        Write("fs/cpu.max", "max 100000\n");
        Write("fs/kubepods/cpu.max", "800000 100000\n");
        Write("fs/kubepods/pod1/cpu.max", "400000 100000\n");
        Write("fs/kubepods/pod1/app/cpu.max", "max 100000\n");
        var b = Detect("0::/kubepods/pod1/app\n", cores: 32);
        Assert.Equal(4, b.Cpus, 9);
        Assert.Equal(4, b.Threads);
        Assert.Equal(2, b.FramesInFlight);
        Assert.Equal(2, b.IntraOpThreads);
    }

    [Fact]
    public void Cgroup_v2_without_a_limit_falls_back_to_the_cores()
    {
        Write("fs/cpu.max", "max 100000\n");
        var b = Detect("0::/\n", cores: 2);
        Assert.Equal(2, b.Cpus);
        Assert.Equal(1, b.IntraOpThreads);
        Assert.Equal(2, b.FramesInFlight);
        Assert.Contains("no CPU quota", b.Source);
    }

    [Fact]
    public void A_quota_above_the_core_count_does_not_raise_the_budget()
    {
        Write("fs/cpu.max", "800000 100000\n");
        var b = Detect("0::/\n", cores: 2);
        Assert.Equal(2, b.Cpus);
        Assert.Equal(2, b.Threads);
    }

    [Fact]
    public void Cgroup_v1_quota_and_period_on_a_joined_cpu_cpuacct_mount()
    {
        Write("fs/cpu,cpuacct/cpu.cfs_quota_us", "300000\n");
        Write("fs/cpu,cpuacct/cpu.cfs_period_us", "100000\n");
        var b = Detect("12:memory:/docker/abc\n4:cpu,cpuacct:/docker/abc\n1:name=systemd:/docker/abc\n", cores: 8);
        Assert.Equal(3, b.Cpus, 9);
        Assert.Equal(3, b.Threads);
        Assert.Equal(2, b.FramesInFlight);
        Assert.Equal(1, b.IntraOpThreads);
        Assert.Contains("cgroup v1", b.Source);
    }

    [Fact]
    public void Cgroup_v1_unlimited_quota_is_minus_one()
    {
        Write("fs/cpu/cpu.cfs_quota_us", "-1\n");
        Write("fs/cpu/cpu.cfs_period_us", "100000\n");
        var b = Detect("3:cpu:/\n", cores: 6);
        Assert.Equal(6, b.Cpus);
        Assert.Equal(2, b.FramesInFlight);
        Assert.Equal(3, b.IntraOpThreads);
    }

    [Fact]
    public void Missing_or_malformed_files_mean_no_quota()
    {
        Write("fs/cpu.max", "lots 100000\n");
        Assert.Equal(4, Detect("0::/\n", cores: 4).Cpus);
        Assert.Equal(4, CpuBudget.Detect(Path.Combine(_root, "nowhere"), Path.Combine(_root, "no-such-file"), 4).Cpus);
    }

    [Fact]
    public void A_tiny_quota_still_gets_one_thread()
    {
        Write("fs/cpu.max", "20000 100000\n");
        var b = Detect("0::/\n", cores: 4);
        Assert.Equal(0.2, b.Cpus, 9);
        Assert.Equal(1, b.Threads);
        Assert.Equal(1, b.IntraOpThreads);
    }

    [Fact]
    public void This_machine_gets_a_usable_budget()
    {
        var b = CpuBudget.Current;
        Assert.InRange(b.IntraOpThreads, 1, Environment.ProcessorCount);
        Assert.InRange(b.IntraOpThreads * b.FramesInFlight, 1, b.Threads);
    }
}
