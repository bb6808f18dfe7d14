using System.Text.Json;
using Strayspot.Service.Batches;
using Strayspot.Service.Store;

namespace Strayspot.Service.Hosting;

/// <summary>What the store needs to know of a calibration or evaluation job besides its JSON.</summary>
public interface IStoredJob
{
    string Id { get; }
    /// <summary>queued, running, done, failed (calibrations also activated).</summary>
    string State { get; }
    DateTimeOffset CreatedUtc { get; }
}

/// <summary>
/// A kind of background job: its records live in the store (<see cref="IJobStore"/>), so every replica sees every
/// job and one replica at a time runs each; its files (checkpoints, outputs) live in one folder per job under the
/// data root, which replicas share. The <c>job.json</c> files of earlier versions are imported into the store at
/// start and renamed <c>job.json.imported</c>, so an upgraded box keeps its jobs.
/// </summary>
public sealed class JobFolder<TJob>(IJobStore store, string kind, string root, TimeSpan lease, TimeSpan poll) where TJob : class, IStoredJob
{
    public const string LegacyFile = "job.json";
    public static readonly IReadOnlyList<string> Runnable = ["queued", "running"];

    private static readonly JsonSerializerOptions Json = new() { WriteIndented = false };
    private readonly SemaphoreSlim _wake = new(0);

    public string Kind { get; } = kind;
    public string Root { get; } = root;

    public string FolderOf(string id) => Path.Combine(Root, id);

    public IReadOnlyList<TJob> All => store.List(Kind).Select(Read).ToList();

    public bool TryGet(string id, out TJob job)
    {
        job = store.Get(Kind, id) is { } r ? Read(r) : null!;
        return job is not null;
    }

    /// <summary>Stores a new job and wakes this replica's runner (any replica may take it).</summary>
    public void Add(TJob job)
    {
        if (!store.Add(Record(job))) throw new InvalidOperationException($"A {Kind} job {job.Id} exists already.");
        _wake.Release();
    }

    /// <summary>Stores a changed job that nobody is running (e.g. an activated calibration); false while a replica runs it.</summary>
    public bool Update(TJob job) => store.Save(Record(job), ClaimOwner.ThisProcess);

    /// <summary>
    /// Imports the job.json files of earlier versions (a job already in the store is left as the store has it), then
    /// runs the jobs this replica claims, one at a time, until <paramref name="stop"/>: <paramref name="run"/> gets the
    /// job and its claim, through which it saves progress.
    /// </summary>
    public async Task RunAsync(Action<TJob, JobClaim<TJob>> run, ILogger log, CancellationToken stop)
    {
        bool imported = false;
        while (!stop.IsCancellationRequested)
        {
            TJob? job = null;
            try
            {
                // Before the first await: the jobs are in the store before the service takes requests.
                if (!imported) imported = Import((file, reason) => log.LogWarning("Skipping unreadable {Kind} job {File}: {Reason}", Kind, file, reason)) >= 0;
                if (store.ClaimNext(Kind, Runnable, ClaimOwner.ThisProcess, lease) is { } claimed) job = Read(claimed);
            }
            catch (StoreUnavailableException e)
            {
                log.LogWarning("No {Kind} job claimed: {Reason}", Kind, e.Message);
            }
            if (job is not null)
            {
                await Task.Run(() => RunClaimed(job, run, log), CancellationToken.None);
                continue;
            }
            // Polled as well as woken: a job queued through another replica, or left by one that died, is found here.
            try { await _wake.WaitAsync(poll, stop); } catch (OperationCanceledException) { break; }
        }
    }

    private void RunClaimed(TJob job, Action<TJob, JobClaim<TJob>> run, ILogger log)
    {
        using var renewal = new ClaimRenewal(() => store.Renew(Kind, job.Id, ClaimOwner.ThisProcess, lease), lease, $"{Kind} job {job.Id}", log);
        var claim = new JobClaim<TJob>(this, job, renewal);
        try { run(job, claim); }
        catch (JobClaimLostException e) { log.LogWarning("{Kind} job {JobId} stopped here: {Reason}", Kind, job.Id, e.Message); }
        finally
        {
            try { claim.Release(); }
            catch (StoreUnavailableException e) { log.LogWarning("{Kind} job {JobId} not handed back (its lease runs out instead): {Reason}", Kind, job.Id, e.Message); }
        }
    }

    internal bool Save(TJob job, bool release) => store.Save(Record(job), ClaimOwner.ThisProcess, release);

    /// <summary>Imports every job.json under the root that the store does not hold yet; unreadable ones are reported and skipped.</summary>
    public int Import(Action<string, string> skipped)
    {
        int imported = 0;
        Directory.CreateDirectory(Root);
        foreach (string file in Directory.EnumerateFiles(Root, LegacyFile, SearchOption.AllDirectories))
        {
            try
            {
                if (JsonSerializer.Deserialize<TJob>(File.ReadAllBytes(file)) is { Id.Length: > 0 } job && store.Add(Record(job))) imported++;
                File.Move(file, file + ".imported", overwrite: true);
            }
            catch (JsonException e) { skipped(file, e.Message); }
            catch (FileNotFoundException) { } // another replica imported it at the same moment
        }
        return imported;
    }

    private JobRecord Record(TJob job) => new(Kind, job.Id, job.State, job.CreatedUtc, JsonSerializer.Serialize(job, Json));

    private static TJob Read(JobRecord r) => JsonSerializer.Deserialize<TJob>(r.Body, Json)!;
}

/// <summary>A job this replica runs: progress is saved through it while the claim holds.</summary>
public sealed class JobClaim<TJob>(JobFolder<TJob> folder, TJob job, ClaimRenewal renewal) where TJob : class, IStoredJob
{
    private readonly Lock _gate = new();
    private TJob _last = job;
    private bool _released;

    /// <summary>Stores the job's new state; throws <see cref="JobClaimLostException"/> when another replica took it over.</summary>
    public TJob Save(TJob job) => Write(job, release: false);

    /// <summary>Stores the job's final state and ends the claim.</summary>
    public TJob Finish(TJob job) => Write(job, release: true);

    internal void Release()
    {
        lock (_gate)
            if (!_released && !renewal.Lost) folder.Save(_last, release: true); // stopped midway (shutdown): another replica may resume it
    }

    private TJob Write(TJob job, bool release)
    {
        lock (_gate)
        {
            if (_released) return job;
            if (renewal.Lost || !folder.Save(job, release))
                throw new JobClaimLostException($"the claim on {folder.Kind} job {job.Id} ran out and another replica took the job over");
            (_last, _released) = (job, release);
            return job;
        }
    }
}

/// <summary>Another replica took the job over (this one's lease ran out): this one stops without writing.</summary>
public sealed class JobClaimLostException(string message) : Exception(message);

/// <summary>The stable codes of calibration and evaluation jobs; never rename one.</summary>
public static class JobErrorCodes
{
    public const string NotFound = "job-not-found";
    public const string NotFinished = "job-not-finished";
}
