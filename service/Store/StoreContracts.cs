using Strayspot.Service.Batches;
using Strayspot.Service.Review;

namespace Strayspot.Service.Store;

/// <summary>
/// Batches, their frames and the index of scored regions. Frames are taken by claims: a claim is a lease held by
/// one owner until an expiry it renews while the frame is scored; a frame is marked done or failed once, and only
/// by the owner of a live claim, so a writer whose lease was lost (and the frame taken over) is refused.
/// </summary>
public interface IBatchStore
{
    /// <summary>Several processes may share the store (leases then split the work between them).</summary>
    bool Shared { get; }

    /// <summary>
    /// Creates the batch, or adds to an existing one with the same id: frames whose id is already there are left
    /// alone (never scored twice). A finished (done) batch that gains frames is queued again. <paramref name="artifacts"/>
    /// (stored as given, see <see cref="Rendering.ArtifactChoice.Format"/>) is set when the batch is created.
    /// </summary>
    (BatchRecord Batch, bool Created, int Added) Submit(string id, string model, string source, string? callbackUrl, IReadOnlyList<NewFrame> frames,
        string? artifacts = null);

    BatchRecord? Get(string id);
    IReadOnlyList<BatchRecord> List(int limit = 100, string? state = null);

    /// <summary>Batches with frames left to score, oldest first (running ones first: they resume after a restart).</summary>
    IReadOnlyList<BatchRecord> Runnable();

    /// <summary>Finished batches whose callback has not yet been delivered nor given up on.</summary>
    IReadOnlyList<BatchRecord> CallbacksDue();

    /// <summary>Moves the batch to <paramref name="to"/> only from one of <paramref name="from"/>; false when it was elsewhere.</summary>
    bool Transition(string id, string to, IReadOnlyList<string> from, string? error = null, string? modelSha256 = null, string? profileVersion = null);

    /// <summary>Running → done when no frame is pending any more; true for the one caller that made the move.</summary>
    bool FinishIfComplete(string id);

    IReadOnlyList<FrameRecord> Frames(string batchId, string? state = null);
    IReadOnlyList<FrameSummary> FrameSummaries(string batchId);
    FrameRecord? Frame(string batchId, int seq);

    /// <summary>
    /// The pending frame with the lowest seq that nobody holds (or whose holder's lease ran out) of a running batch,
    /// its attempt count raised; null when there is none.
    /// </summary>
    FrameClaim? ClaimNextFrame(string batchId, string owner, TimeSpan lease);

    /// <summary>Pushes the claim's expiry on; false when the claim was lost (expired and taken, or the frame finished).</summary>
    bool RenewClaim(FrameClaim claim, TimeSpan lease);

    /// <summary>Marks the claimed frame done with its summary and region index, counted in its batch, in one transaction; false when refused.</summary>
    bool CompleteFrame(FrameClaim claim, FrameResult result);

    /// <summary>Marks the claimed frame failed (bad file): reported, not retried. False when refused.</summary>
    bool FailFrame(FrameClaim claim, string error);

    void RecordCallback(string id, string state, int attempts);

    /// <summary>Takes the delivery of a due callback for <paramref name="lease"/>; false when another holds it (or it is not due).</summary>
    bool ClaimCallback(string id, string owner, TimeSpan lease);

    /// <summary>The regions of a batch's scored frames: class beneath and highest score, by frame then region.</summary>
    IReadOnlyList<RegionBrief> RegionBriefs(string batchId);

    /// <summary>Throws <see cref="StoreUnavailableException"/> when the store cannot be reached.</summary>
    void Ping();
}

/// <summary>
/// Reviewers' decisions: one current decision per target (a region, or the whole frame) and a log of every write
/// (withdrawals included), written in one transaction, so concurrent reviewers overwrite each other's current
/// decision (the latest write wins) yet no write is lost from the record.
/// </summary>
public interface IDecisionStore
{
    /// <summary>Stores <paramref name="verdict"/> as the current decision on the target and logs it; returns what is stored.</summary>
    Decision Decide(string batchId, int seq, int? region, string verdict, string? note, string? decidedBy);

    /// <summary>Withdraws the current decision on the target (logged); false when there was none.</summary>
    bool Withdraw(string batchId, int seq, int? region, string? decidedBy);

    /// <summary>The current decisions of a batch (or of one frame), by frame then region; the frame's own first.</summary>
    IReadOnlyList<Decision> Current(string batchId, int? seq = null);

    /// <summary>Every write to the batch's decisions, oldest first, from <paramref name="after"/> on (exclusive).</summary>
    IReadOnlyList<DecisionEntry> Log(string batchId, long after = 0, int limit = 1000);

    /// <summary>
    /// Stores <paramref name="verdict"/> as the current decision on track <paramref name="track"/> of the recording
    /// <paramref name="seq"/> and logs it once (one log entry, whatever the number of frames the track spans).
    /// </summary>
    Decision DecideTrack(string batchId, int seq, int track, string verdict, string? note, string? decidedBy);

    /// <summary>Withdraws the current decision on a track (logged); false when there was none.</summary>
    bool WithdrawTrack(string batchId, int seq, int track, string? decidedBy);

    /// <summary>The current track decisions of a batch (or of one recording), by recording then track; each has <see cref="Decision.Track"/> set and no region.</summary>
    IReadOnlyList<Decision> CurrentTracks(string batchId, int? seq = null);
}

/// <summary>
/// Calibration and evaluation job records (kind, id, state and the job's own JSON), seen by every replica. A queued
/// or running job is run by one replica at a time: the one holding its claim, a lease renewed while the job runs, so
/// a job whose replica died is taken over once the lease runs out. A writer whose claim was lost is refused.
/// </summary>
public interface IJobStore
{
    /// <summary>Adds the job (held by <paramref name="owner"/> for <paramref name="lease"/> when given); false when one with its id exists (left alone).</summary>
    bool Add(JobRecord job, string? owner = null, TimeSpan lease = default);

    JobRecord? Get(string kind, string id);

    /// <summary>The jobs of a kind, newest first.</summary>
    IReadOnlyList<JobRecord> List(string kind, int limit = 1000);

    /// <summary>
    /// Stores the job's new state and record: refused (false) while another owner's live claim holds it. With
    /// <paramref name="release"/> the writer's claim ends (finished, failed, or handed back at shutdown).
    /// </summary>
    bool Save(JobRecord job, string owner, bool release = false);

    /// <summary>The oldest job of the kind in one of <paramref name="runnable"/> states that nobody holds (or whose holder's lease ran out), now held by <paramref name="owner"/>.</summary>
    JobRecord? ClaimNext(string kind, IReadOnlyList<string> runnable, string owner, TimeSpan lease);

    /// <summary>Pushes the claim's expiry on; false when <paramref name="owner"/> no longer holds the job.</summary>
    bool Renew(string kind, string id, string owner, TimeSpan lease);
}

/// <summary>One stored job: <see cref="Body"/> is the job's own JSON, as the API shows it.</summary>
public sealed record JobRecord(string Kind, string Id, string State, DateTimeOffset Created, string Body);

/// <summary>Who holds claims: host, process and a random part (process ids repeat across containers).</summary>
public static class ClaimOwner
{
    public static readonly string ThisProcess = $"{Environment.MachineName}/{Environment.ProcessId}/{Guid.NewGuid().ToString("N")[..8]}";
}

/// <summary>A frame taken by <see cref="Owner"/>; only its owner may finish it.</summary>
public sealed record FrameClaim(FrameRecord Frame, string Owner)
{
    public string BatchId => Frame.BatchId;
    public int Seq => Frame.Seq;
}

/// <summary>The store could not be reached (server down, network cut); callers back off and try again.</summary>
public sealed class StoreUnavailableException(string message, Exception? inner = null) : Exception(message, inner);

/// <summary>One store: batches, decisions and jobs over one connection (SQLite) or one pool (PostgreSQL).</summary>
public sealed class BatchDatabase(string engine, string describe, IBatchStore batches, IDecisionStore decisions, IJobStore jobs, IDisposable owner) : IDisposable
{
    public const string Sqlite = "sqlite";
    public const string Postgres = "postgres";

    /// <summary><see cref="Sqlite"/> or <see cref="Postgres"/>.</summary>
    public string Engine { get; } = engine;
    /// <summary>Where it is, without secrets (a file path, or host/port/database).</summary>
    public string Describe { get; } = describe;
    public IBatchStore Batches { get; } = batches;
    public IDecisionStore Decisions { get; } = decisions;
    public IJobStore Jobs { get; } = jobs;

    private Func<string?> _problem = () => null;

    /// <summary>
    /// Why the store could not be reached on the last try, or null. Kept fresh by the traffic: the batch worker asks
    /// the store at least every poll interval, so readiness needs no query of its own.
    /// </summary>
    public string? Problem => _problem();

    /// <summary>The SQLite file at <paramref name="path"/>, created and migrated as needed.</summary>
    public static BatchDatabase OpenSqlite(string path, TimeProvider? time = null)
    {
        var db = new SqliteDatabase(path, time ?? TimeProvider.System);
        return new BatchDatabase(Sqlite, db.File, new SqliteBatchStore(db), new SqliteDecisionStore(db), new SqliteJobStore(db), db);
    }

    /// <summary>The PostgreSQL database named by <paramref name="connectionString"/>, migrated as needed.</summary>
    public static BatchDatabase OpenPostgres(string connectionString, TimeProvider? time = null)
    {
        var db = new PostgresDatabase(connectionString, time ?? TimeProvider.System);
        return new BatchDatabase(Postgres, db.Describe, new PostgresBatchStore(db), new PostgresDecisionStore(db), new PostgresJobStore(db), db) { _problem = () => db.Problem };
    }

    public void Dispose() => owner.Dispose();
}
