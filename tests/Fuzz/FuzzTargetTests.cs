using System.Diagnostics;
using Strayspot.Fuzz;
using Xunit.Abstractions;

namespace Strayspot.Tests.Fuzz;

/// <summary>
/// Each fuzz target over its committed seed corpus, its regression inputs (every crash found becomes one) and a bounded
/// number of deterministic mutations: only our coded refusals may come out. Longer coverage-guided runs: DEVELOPERS.md.
/// </summary>
public class FuzzTargetTests(ITestOutputHelper output)
{
    private const int Mutations = 3000;
    private static readonly TimeSpan Budget = TimeSpan.FromSeconds(4);

    public static TheoryData<string> Targets() => new(FuzzTargets.All.Keys);

    private static string CorpusFolder(string target) => Path.Combine(AppContext.BaseDirectory, "Fuzz", "corpus", target);

    private static List<byte[]> Seeds(string target)
    {
        var seeds = new List<byte[]>();
        foreach (string folder in new[] { CorpusFolder(target), Path.Combine(AppContext.BaseDirectory, "Fuzz", "regressions", target) })
            if (Directory.Exists(folder))
                seeds.AddRange(Directory.GetFiles(folder).Order(StringComparer.Ordinal).Select(File.ReadAllBytes));
        return seeds;
    }

    [Theory]
    [MemberData(nameof(Targets))]
    public void A_target_meets_its_corpus_and_mutations_with_coded_refusals_only(string target)
    {
        var seeds = Seeds(target);
        Assert.NotEmpty(seeds);
        foreach (var seed in seeds) Check(target, seed, "seed");

        // string.GetHashCode differs from process to process; a fixed hash keeps the mutations the same in every run.
        var random = new Random(StableHash(target) ^ 20261202);
        var clock = Stopwatch.StartNew();
        int ran = 0;
        for (; ran < Mutations && clock.Elapsed < Budget; ran++)
            Check(target, Mutate(seeds, random), $"mutation {ran}");
        output.WriteLine($"{target}: {seeds.Count} seeds, {ran} mutations in {clock.ElapsedMilliseconds} ms");
    }

    private static void Check(string target, byte[] input, string what)
    {
        try
        {
            FuzzTargets.Run(target, input);
        }
        catch (Exception e)
        {
            Assert.Fail($"{target} {what} ({input.Length} bytes, base64 {Convert.ToBase64String(input.AsSpan(0, Math.Min(input.Length, 4096)))}) " +
                        $"threw {e.GetType().Name}: {e}");
        }
    }

    /// <summary>Byte-level mutations of the kind coverage-guided fuzzers use: flips, interesting values, cuts, repeats, splices.</summary>
    public static byte[] Mutate(IReadOnlyList<byte[]> seeds, Random random)
    {
        var data = new List<byte>(seeds[random.Next(seeds.Count)]);
        int steps = 1 + random.Next(4);
        for (int s = 0; s < steps; s++)
        {
            int at = data.Count == 0 ? 0 : random.Next(data.Count);
            switch (random.Next(8))
            {
                case 0 when data.Count > 0: data[at] ^= (byte)(1 << random.Next(8)); break;
                case 1 when data.Count > 0: data[at] = (byte)new[] { 0x00, 0xFF, 0x7F, 0x80, 0x01, (byte)'"', (byte)'-', (byte)'9' }[random.Next(8)]; break;
                case 2 when data.Count > 0: data.RemoveRange(at, Math.Min(data.Count - at, 1 + random.Next(16))); break;
                case 3: data.InsertRange(at, Enumerable.Repeat((byte)random.Next(256), 1 + random.Next(8))); break;
                case 4 when data.Count > 0: data.RemoveRange(at, data.Count - at); break;
                case 5 when data.Count > 0:
                    int len = Math.Min(data.Count - at, 1 + random.Next(32));
                    data.InsertRange(random.Next(data.Count), data.GetRange(at, len));
                    break;
                case 6:
                    var other = seeds[random.Next(seeds.Count)];
                    if (other.Length > 0)
                    {
                        int from = random.Next(other.Length);
                        data.InsertRange(at, other.Skip(from).Take(1 + random.Next(64)));
                    }
                    break;
                case 7 when data.Count >= 4:
                    // Numbers in headers and sizes: a 32-bit field set to an extreme.
                    int p = random.Next(data.Count - 3);
                    byte[] extreme = BitConverter.GetBytes(new[] { int.MaxValue, int.MinValue, -1, 0, 65536 }[random.Next(5)]);
                    for (int i = 0; i < 4; i++) data[p + i] = extreme[i];
                    break;
            }
        }
        return data.ToArray();
    }

    private static int StableHash(string text)
    {
        uint h = 2166136261;
        foreach (char c in text) h = (h ^ c) * 16777619;
        return (int)(h & 0x7fffffff);
    }
}
