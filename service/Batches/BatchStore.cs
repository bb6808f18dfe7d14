using System.Globalization;
using Microsoft.Data.Sqlite;

namespace Strayspot.Service.Batches;

/// <summary>
/// Batches and their frames in one SQLite file (WAL). A frame is marked done only after its files are in place, in
/// one transaction with its summary and the batch counts, so a crash at any point leaves either a done frame with
/// its outputs or a pending one that is scored again.
/// </summary>
/// <remarks>
/// synchronous=FULL: every done mark is on disk before the next frame starts, so a power cut cannot roll back a mark
/// whose outputs a client may already have fetched; the fsync per frame is small next to scoring the frame.
/// One connection behind a lock: the writes are a few tiny statements per frame, never the bottleneck.
/// </remarks>
public sealed partial class BatchStore : IDisposable
{
    private readonly SqliteConnection _db;
    private readonly Lock _gate = new();
    private readonly TimeProvider _time;

    public BatchStore(string path, TimeProvider? time = null)
    {
        _time = time ?? TimeProvider.System;
        DatabaseFile = Path.GetFullPath(path);
        Directory.CreateDirectory(Path.GetDirectoryName(DatabaseFile)!);
        _db = new SqliteConnection(new SqliteConnectionStringBuilder { DataSource = DatabaseFile, Pooling = false }.ToString());
        _db.Open();
        Exec("PRAGMA journal_mode=WAL;");
        Exec("PRAGMA synchronous=FULL;");
        Exec("PRAGMA busy_timeout=5000;");
        Exec("PRAGMA foreign_keys=ON;");
        Exec("""
            CREATE TABLE IF NOT EXISTS batches (
                id TEXT PRIMARY KEY,
                model TEXT NOT NULL,
                state TEXT NOT NULL,
                source TEXT NOT NULL,
                created TEXT NOT NULL,
                updated TEXT NOT NULL,
                frame_count INTEGER NOT NULL DEFAULT 0,
                done_count INTEGER NOT NULL DEFAULT 0,
                failed_count INTEGER NOT NULL DEFAULT 0,
                callback_url TEXT,
                callback_state TEXT,
                callback_attempts INTEGER NOT NULL DEFAULT 0,
                model_sha256 TEXT,
                profile_version TEXT,
                error TEXT);
            CREATE TABLE IF NOT EXISTS frames (
                batch_id TEXT NOT NULL REFERENCES batches(id),
                seq INTEGER NOT NULL,
                frame_id TEXT NOT NULL,
                source_path TEXT NOT NULL,
                state TEXT NOT NULL DEFAULT 'pending',
                frame_score REAL,
                region_count INTEGER,
                report_path TEXT,
                regions_json TEXT,
                error TEXT,
                scored_at TEXT,
                attempts INTEGER NOT NULL DEFAULT 0,
                PRIMARY KEY (batch_id, seq),
                UNIQUE (batch_id, frame_id));
            CREATE INDEX IF NOT EXISTS batches_state ON batches(state, created);
            """);
        CreateReviewTables();
    }

    public string DatabaseFile { get; }

    /// <summary>
    /// Creates the batch, or adds to an existing one with the same id: frames whose id is already there are left
    /// alone (never scored twice). Returns the batch, whether it was new, and how many frames were added.
    /// A finished (done) batch that gains frames is queued again.
    /// </summary>
    public (BatchRecord Batch, bool Created, int Added) Submit(string id, string model, string source, string? callbackUrl,
        IReadOnlyList<NewFrame> frames)
    {
        lock (_gate)
        {
            using var tx = _db.BeginTransaction();
            string now = Now();
            var existing = GetLocked(id, tx);
            bool created = existing is null;
            if (created)
            {
                Exec(tx, "INSERT INTO batches (id, model, state, source, created, updated, callback_url) VALUES ($id, $m, 'queued', $s, $now, $now, $cb)",
                    ("$id", id), ("$m", model), ("$s", source), ("$now", now), ("$cb", callbackUrl));
            }
            int next = Convert.ToInt32(Scalar(tx, "SELECT COALESCE(MAX(seq), 0) FROM frames WHERE batch_id = $id", ("$id", id)), CultureInfo.InvariantCulture);
            int added = 0;
            using (var cmd = _db.CreateCommand())
            {
                cmd.Transaction = tx;
                cmd.CommandText = "INSERT OR IGNORE INTO frames (batch_id, seq, frame_id, source_path) VALUES ($id, $seq, $f, $p)";
                var pId = cmd.Parameters.Add("$id", SqliteType.Text);
                var pSeq = cmd.Parameters.Add("$seq", SqliteType.Integer);
                var pF = cmd.Parameters.Add("$f", SqliteType.Text);
                var pP = cmd.Parameters.Add("$p", SqliteType.Text);
                pId.Value = id;
                foreach (var f in frames)
                {
                    pSeq.Value = next + 1;
                    pF.Value = f.FrameId;
                    pP.Value = f.SourcePath;
                    if (cmd.ExecuteNonQuery() == 1) { next++; added++; }
                }
            }
            if (added > 0)
            {
                Exec(tx, "UPDATE batches SET frame_count = frame_count + $n, updated = $now, " +
                         "state = CASE WHEN state = 'done' THEN 'queued' ELSE state END, " +
                         "callback_state = CASE WHEN state = 'done' THEN NULL ELSE callback_state END WHERE id = $id",
                    ("$n", added), ("$now", now), ("$id", id));
            }
            var batch = GetLocked(id, tx)!;
            tx.Commit();
            return (batch, created, added);
        }
    }

    public BatchRecord? Get(string id)
    {
        lock (_gate) return GetLocked(id, null);
    }

    public IReadOnlyList<BatchRecord> List(int limit = 100, string? state = null)
    {
        lock (_gate)
        {
            using var cmd = _db.CreateCommand();
            cmd.CommandText = "SELECT * FROM batches " + (state is null ? "" : "WHERE state = $state ") + "ORDER BY created DESC, id LIMIT $limit";
            if (state is not null) cmd.Parameters.AddWithValue("$state", state);
            cmd.Parameters.AddWithValue("$limit", limit);
            return ReadBatches(cmd);
        }
    }

    /// <summary>Batches with frames left to score, oldest first (running ones first: they resume after a restart).</summary>
    public IReadOnlyList<BatchRecord> Runnable()
    {
        lock (_gate)
        {
            using var cmd = _db.CreateCommand();
            cmd.CommandText = "SELECT * FROM batches WHERE state IN ('queued', 'running') ORDER BY state = 'queued', created, id";
            return ReadBatches(cmd);
        }
    }

    /// <summary>Finished batches whose callback has not yet been delivered nor given up on.</summary>
    public IReadOnlyList<BatchRecord> CallbacksDue()
    {
        lock (_gate)
        {
            using var cmd = _db.CreateCommand();
            cmd.CommandText = "SELECT * FROM batches WHERE callback_state = 'pending' ORDER BY updated";
            return ReadBatches(cmd);
        }
    }

    /// <summary>Moves the batch to <paramref name="to"/> only from one of <paramref name="from"/>; false when it was elsewhere.</summary>
    public bool Transition(string id, string to, IReadOnlyList<string> from, string? error = null, string? modelSha256 = null,
        string? profileVersion = null)
    {
        lock (_gate)
        {
            using var cmd = _db.CreateCommand();
            var names = new List<string>();
            for (int i = 0; i < from.Count; i++)
            {
                names.Add("$f" + i);
                cmd.Parameters.AddWithValue("$f" + i, from[i]);
            }
            bool finished = BatchStates.IsFinished(to);
            cmd.CommandText = "UPDATE batches SET state = $to, updated = $now, error = COALESCE($err, error), " +
                              "model_sha256 = COALESCE($sha, model_sha256), profile_version = COALESCE($pv, profile_version)" +
                              (finished ? ", callback_state = CASE WHEN callback_url IS NULL THEN NULL ELSE 'pending' END" : "") +
                              $" WHERE id = $id AND state IN ({string.Join(", ", names)})";
            cmd.Parameters.AddWithValue("$to", to);
            cmd.Parameters.AddWithValue("$now", Now());
            cmd.Parameters.AddWithValue("$err", (object?)error ?? DBNull.Value);
            cmd.Parameters.AddWithValue("$sha", (object?)modelSha256 ?? DBNull.Value);
            cmd.Parameters.AddWithValue("$pv", (object?)profileVersion ?? DBNull.Value);
            cmd.Parameters.AddWithValue("$id", id);
            return cmd.ExecuteNonQuery() == 1;
        }
    }

    public IReadOnlyList<FrameRecord> Frames(string batchId, string? state = null)
    {
        lock (_gate)
        {
            using var cmd = _db.CreateCommand();
            cmd.CommandText = "SELECT * FROM frames WHERE batch_id = $id " + (state is null ? "" : "AND state = $state ") + "ORDER BY seq";
            cmd.Parameters.AddWithValue("$id", batchId);
            if (state is not null) cmd.Parameters.AddWithValue("$state", state);
            return ReadFrames(cmd);
        }
    }

    /// <summary>
    /// Every frame of a batch, briefly. Only columns stored before a frame's regions are read: SQLite reaches later
    /// ones through the regions' overflow pages, which made a listing of a large batch ten times slower.
    /// </summary>
    public IReadOnlyList<FrameSummary> FrameSummaries(string batchId)
    {
        lock (_gate)
        {
            return Query(null, "SELECT seq, frame_id, state, frame_score, region_count FROM frames WHERE batch_id = $id ORDER BY seq",
                r => new FrameSummary(r.GetInt32(0), r.GetString(1), r.GetString(2), r.IsDBNull(3) ? null : (float)r.GetDouble(3),
                    r.IsDBNull(4) ? null : r.GetInt32(4)),
                ("$id", batchId));
        }
    }

    public FrameRecord? Frame(string batchId, int seq)
    {
        lock (_gate)
        {
            using var cmd = _db.CreateCommand();
            cmd.CommandText = "SELECT * FROM frames WHERE batch_id = $id AND seq = $seq";
            cmd.Parameters.AddWithValue("$id", batchId);
            cmd.Parameters.AddWithValue("$seq", seq);
            return ReadFrames(cmd).FirstOrDefault();
        }
    }

    /// <summary>The pending frame with the lowest seq, its attempt count raised (kept across restarts for diagnosis).</summary>
    public FrameRecord? StartNextFrame(string batchId)
    {
        lock (_gate)
        {
            using var tx = _db.BeginTransaction();
            using var cmd = _db.CreateCommand();
            cmd.Transaction = tx;
            cmd.CommandText = "SELECT * FROM frames WHERE batch_id = $id AND state = 'pending' ORDER BY seq LIMIT 1";
            cmd.Parameters.AddWithValue("$id", batchId);
            var frame = ReadFrames(cmd).FirstOrDefault();
            if (frame is null) return null;
            Exec(tx, "UPDATE frames SET attempts = attempts + 1 WHERE batch_id = $id AND seq = $seq", ("$id", batchId), ("$seq", frame.Seq));
            tx.Commit();
            return frame with { Attempts = frame.Attempts + 1 };
        }
    }

    /// <summary>Marks a pending frame done with its summary and counts it, in one transaction. False if it was not pending.</summary>
    public bool CompleteFrame(string batchId, int seq, FrameResult result)
    {
        lock (_gate)
        {
            using var tx = _db.BeginTransaction();
            string now = Now();
            int n = Exec(tx, "UPDATE frames SET state = 'done', frame_score = $score, region_count = $rc, report_path = $rp, " +
                             "regions_json = $rj, error = NULL, scored_at = $now WHERE batch_id = $id AND seq = $seq AND state = 'pending'",
                ("$score", (double)result.FrameScore), ("$rc", result.RegionCount), ("$rp", result.ReportPath), ("$rj", result.RegionsJson),
                ("$now", now), ("$id", batchId), ("$seq", seq));
            if (n == 1)
            {
                Exec(tx, "UPDATE batches SET done_count = done_count + 1, updated = $now WHERE id = $id", ("$now", now), ("$id", batchId));
                IndexRegions(tx, batchId, seq, result.RegionsJson);
            }
            tx.Commit();
            return n == 1;
        }
    }

    /// <summary>Marks a pending frame failed (bad file): it is reported, not retried.</summary>
    public bool FailFrame(string batchId, int seq, string error)
    {
        lock (_gate)
        {
            using var tx = _db.BeginTransaction();
            string now = Now();
            int n = Exec(tx, "UPDATE frames SET state = 'failed', error = $err, scored_at = $now WHERE batch_id = $id AND seq = $seq AND state = 'pending'",
                ("$err", error), ("$now", now), ("$id", batchId), ("$seq", seq));
            if (n == 1)
                Exec(tx, "UPDATE batches SET failed_count = failed_count + 1, updated = $now WHERE id = $id", ("$now", now), ("$id", batchId));
            tx.Commit();
            return n == 1;
        }
    }

    public void RecordCallback(string id, string state, int attempts)
    {
        lock (_gate)
            Exec(null, "UPDATE batches SET callback_state = $s, callback_attempts = $a WHERE id = $id", ("$s", state), ("$a", attempts), ("$id", id));
    }

    public void Dispose()
    {
        lock (_gate)
        {
            _db.Dispose();
        }
    }

    private string Now() => _time.GetUtcNow().ToString("yyyy-MM-dd'T'HH:mm:ss.ffffff'Z'", CultureInfo.InvariantCulture);

    private static DateTimeOffset ParseTime(string s) => DateTimeOffset.Parse(s, CultureInfo.InvariantCulture, DateTimeStyles.AssumeUniversal | DateTimeStyles.AdjustToUniversal);

    private BatchRecord? GetLocked(string id, SqliteTransaction? tx)
    {
        using var cmd = _db.CreateCommand();
        cmd.Transaction = tx;
        cmd.CommandText = "SELECT * FROM batches WHERE id = $id";
        cmd.Parameters.AddWithValue("$id", id);
        return ReadBatches(cmd).FirstOrDefault();
    }

    private static List<BatchRecord> ReadBatches(SqliteCommand cmd)
    {
        var list = new List<BatchRecord>();
        using var r = cmd.ExecuteReader();
        while (r.Read())
        {
            list.Add(new BatchRecord(
                r.GetString(r.GetOrdinal("id")), r.GetString(r.GetOrdinal("model")), r.GetString(r.GetOrdinal("state")),
                r.GetString(r.GetOrdinal("source")),
                ParseTime(r.GetString(r.GetOrdinal("created"))), ParseTime(r.GetString(r.GetOrdinal("updated"))),
                r.GetInt32(r.GetOrdinal("frame_count")), r.GetInt32(r.GetOrdinal("done_count")), r.GetInt32(r.GetOrdinal("failed_count")),
                Str(r, "callback_url"), Str(r, "callback_state"), r.GetInt32(r.GetOrdinal("callback_attempts")),
                Str(r, "model_sha256"), Str(r, "profile_version"), Str(r, "error")));
        }
        return list;
    }

    private static List<FrameRecord> ReadFrames(SqliteCommand cmd)
    {
        var list = new List<FrameRecord>();
        using var r = cmd.ExecuteReader();
        while (r.Read())
        {
            int score = r.GetOrdinal("frame_score"), rc = r.GetOrdinal("region_count");
            string? at = Str(r, "scored_at");
            list.Add(new FrameRecord(
                r.GetString(r.GetOrdinal("batch_id")), r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")),
                r.GetString(r.GetOrdinal("source_path")), r.GetString(r.GetOrdinal("state")),
                r.IsDBNull(score) ? null : (float)r.GetDouble(score), r.IsDBNull(rc) ? null : r.GetInt32(rc),
                Str(r, "report_path"), Str(r, "regions_json"), Str(r, "error"),
                at is null ? null : ParseTime(at), r.GetInt32(r.GetOrdinal("attempts"))));
        }
        return list;
    }

    private static string? Str(SqliteDataReader r, string column)
    {
        int i = r.GetOrdinal(column);
        return r.IsDBNull(i) ? null : r.GetString(i);
    }

    private void Exec(string sql)
    {
        using var cmd = _db.CreateCommand();
        cmd.CommandText = sql;
        cmd.ExecuteNonQuery();
    }

    private int Exec(SqliteTransaction? tx, string sql, params (string Name, object? Value)[] args)
    {
        using var cmd = _db.CreateCommand();
        cmd.Transaction = tx;
        cmd.CommandText = sql;
        foreach (var (n, v) in args) cmd.Parameters.AddWithValue(n, v ?? DBNull.Value);
        return cmd.ExecuteNonQuery();
    }

    /// <summary>Runs a query and turns each row into a <typeparamref name="T"/>.</summary>
    private List<T> Query<T>(SqliteTransaction? tx, string sql, Func<SqliteDataReader, T> row, params (string Name, object? Value)[] args)
    {
        using var cmd = _db.CreateCommand();
        cmd.Transaction = tx;
        cmd.CommandText = sql;
        foreach (var (n, v) in args) cmd.Parameters.AddWithValue(n, v ?? DBNull.Value);
        var list = new List<T>();
        using var r = cmd.ExecuteReader();
        while (r.Read()) list.Add(row(r));
        return list;
    }

    private object? Scalar(SqliteTransaction? tx, string sql, params (string Name, object? Value)[] args)
    {
        using var cmd = _db.CreateCommand();
        cmd.Transaction = tx;
        cmd.CommandText = sql;
        foreach (var (n, v) in args) cmd.Parameters.AddWithValue(n, v ?? DBNull.Value);
        return cmd.ExecuteScalar();
    }
}
