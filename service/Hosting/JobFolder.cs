using System.Collections.Concurrent;
using System.Text.Json;

namespace Strayspot.Service.Hosting;

/// <summary>
/// Where a kind of background job keeps its state: one folder per job under the data root with a <c>job.json</c>
/// written atomically, read back at start so a restarted service knows every job.
/// </summary>
public sealed class JobFolder<TJob>(string root, Func<TJob, string> idOf) where TJob : class
{
    private static readonly JsonSerializerOptions Json = new() { WriteIndented = true };
    private readonly ConcurrentDictionary<string, TJob> _jobs = new(StringComparer.Ordinal);

    public string Root { get; } = root;

    public string FolderOf(string id) => Path.Combine(Root, id);

    public IReadOnlyCollection<TJob> All => _jobs.Values.ToList();

    public bool TryGet(string id, out TJob job) => _jobs.TryGetValue(id, out job!);

    public void Save(TJob job)
    {
        string id = idOf(job);
        _jobs[id] = job;
        AtomicFile.Write(Path.Combine(FolderOf(id), "job.json"), s => JsonSerializer.Serialize(s, job, Json));
    }

    /// <summary>Reads every job.json under the root; unreadable ones are reported and skipped.</summary>
    public IReadOnlyList<TJob> Load(Action<string, string> skipped)
    {
        Directory.CreateDirectory(Root);
        foreach (string file in Directory.EnumerateFiles(Root, "job.json", SearchOption.AllDirectories))
        {
            try
            {
                var job = JsonSerializer.Deserialize<TJob>(File.ReadAllBytes(file), Json);
                if (job is not null) _jobs[idOf(job)] = job;
            }
            catch (JsonException e) { skipped(file, e.Message); }
        }
        return _jobs.Values.ToList();
    }
}

/// <summary>The stable codes of calibration and evaluation jobs; never rename one.</summary>
public static class JobErrorCodes
{
    public const string NotFound = "job-not-found";
    public const string NotFinished = "job-not-finished";
}
