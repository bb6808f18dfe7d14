using System.Globalization;
using Microsoft.Data.Sqlite;
using Strayspot.Service.Batches;

namespace Strayspot.Service.Store;

/// <summary>
/// One SQLite file (WAL) behind one connection and one lock, shared by the batch and decision stores. Only one
/// process uses the file, so claims of an earlier process (which crashed or stopped) are void at open.
/// </summary>
/// <remarks>
/// synchronous=FULL: every done mark is on disk before the next frame starts, so a power cut cannot roll back a mark
/// whose outputs a client may already have fetched; the fsync per frame is small next to scoring the frame.
/// One connection behind a lock: the writes are a few tiny statements per frame, never the bottleneck.
/// </remarks>
public sealed class SqliteDatabase : IDisposable
{
    private readonly SqliteConnection _db;
    private readonly TimeProvider _time;

    public SqliteDatabase(string path, TimeProvider time)
    {
        _time = time;
        File = Path.GetFullPath(path);
        Directory.CreateDirectory(Path.GetDirectoryName(File)!);
        _db = new SqliteConnection(new SqliteConnectionStringBuilder { DataSource = File, Pooling = false }.ToString());
        _db.Open();
        Exec(null, "PRAGMA journal_mode=WAL;");
        Exec(null, "PRAGMA synchronous=FULL;");
        Exec(null, "PRAGMA busy_timeout=5000;");
        Exec(null, "PRAGMA foreign_keys=ON;");
        Migrate();
        Exec(null, "UPDATE frames SET lease_owner = NULL, lease_until = NULL WHERE lease_owner IS NOT NULL");
        Exec(null, "UPDATE batches SET callback_owner = NULL, callback_until = NULL WHERE callback_owner IS NOT NULL");
        Exec(null, "UPDATE jobs SET lease_owner = NULL, lease_until = NULL WHERE lease_owner IS NOT NULL");
    }

    public string File { get; }
    public Lock Gate { get; } = new();

    public int SchemaVersion
    {
        get { lock (Gate) return Convert.ToInt32(Scalar(null, "SELECT COALESCE(MAX(version), 0) FROM schema_version"), CultureInfo.InvariantCulture); }
    }

    public SqliteTransaction Begin() => _db.BeginTransaction();

    public string Now() => Format(_time.GetUtcNow());

    public static string Format(DateTimeOffset t) => t.UtcDateTime.ToString("yyyy-MM-dd'T'HH:mm:ss.ffffff'Z'", CultureInfo.InvariantCulture);

    public static DateTimeOffset ParseTime(string s) =>
        DateTimeOffset.Parse(s, CultureInfo.InvariantCulture, DateTimeStyles.AssumeUniversal | DateTimeStyles.AdjustToUniversal);

    public SqliteCommand Command(SqliteTransaction? tx, string sql, params (string Name, object? Value)[] args)
    {
        var cmd = _db.CreateCommand();
        cmd.Transaction = tx;
        cmd.CommandText = sql;
        foreach (var (n, v) in args) cmd.Parameters.AddWithValue(n, v ?? DBNull.Value);
        return cmd;
    }

    public int Exec(SqliteTransaction? tx, string sql, params (string Name, object? Value)[] args)
    {
        using var cmd = Command(tx, sql, args);
        return cmd.ExecuteNonQuery();
    }

    public object? Scalar(SqliteTransaction? tx, string sql, params (string Name, object? Value)[] args)
    {
        using var cmd = Command(tx, sql, args);
        return cmd.ExecuteScalar();
    }

    /// <summary>Runs a query and turns each row into a <typeparamref name="T"/>.</summary>
    public List<T> Query<T>(SqliteTransaction? tx, string sql, Func<SqliteDataReader, T> row, params (string Name, object? Value)[] args)
    {
        using var cmd = Command(tx, sql, args);
        return DbRows.Read(cmd, row);
    }

    public static string? Str(SqliteDataReader r, string column) => DbRows.Str(r, column);

    public void Dispose()
    {
        lock (Gate) _db.Dispose();
    }

    private void Migrate()
    {
        Exec(null, "CREATE TABLE IF NOT EXISTS schema_version (version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied TEXT NOT NULL)");
        int have = SchemaVersion;
        if (have > StoreSchema.Latest)
            throw new InvalidOperationException($"The batch database {File} is at schema version {have}; this build knows up to {StoreSchema.Latest}. Use a newer build.");
        foreach (var step in Steps)
        {
            if (step.Version <= have) continue;
            using var tx = Begin();
            step.Apply(tx);
            Exec(tx, "INSERT INTO schema_version (version, name, applied) VALUES ($v, $n, $t)",
                ("$v", step.Version), ("$n", StoreSchema.Versions.First(v => v.Version == step.Version).Name), ("$t", Now()));
            tx.Commit();
        }
    }

    /// <summary>The steps of <see cref="StoreSchema.Versions"/> for SQLite. Step 1 creates only what is missing: files from before versioning hold it already.</summary>
    internal IReadOnlyList<SchemaStep<SqliteTransaction>> Steps =>
    [
        new(1, tx => Exec(tx, """
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
            CREATE TABLE IF NOT EXISTS decision_log (
                revision INTEGER PRIMARY KEY AUTOINCREMENT,
                batch_id TEXT NOT NULL REFERENCES batches(id),
                seq INTEGER NOT NULL,
                region INTEGER NOT NULL,
                verdict TEXT,
                note TEXT,
                decided_by TEXT,
                decided_at TEXT NOT NULL);
            CREATE INDEX IF NOT EXISTS decision_log_batch ON decision_log(batch_id, revision);
            CREATE TABLE IF NOT EXISTS decisions (
                batch_id TEXT NOT NULL REFERENCES batches(id),
                seq INTEGER NOT NULL,
                region INTEGER NOT NULL,
                verdict TEXT NOT NULL,
                note TEXT,
                decided_by TEXT,
                decided_at TEXT NOT NULL,
                revision INTEGER NOT NULL,
                PRIMARY KEY (batch_id, seq, region),
                FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
            CREATE TABLE IF NOT EXISTS frame_regions (
                batch_id TEXT NOT NULL,
                seq INTEGER NOT NULL,
                region INTEGER NOT NULL,
                class_beneath TEXT NOT NULL,
                max_score REAL NOT NULL,
                PRIMARY KEY (batch_id, seq, region),
                FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
            """)),
        new(2, tx =>
        {
            // Frames scored before the index existed.
            var missing = Query(tx, "SELECT batch_id, seq, regions_json FROM frames f WHERE state = $done AND region_count > 0 AND regions_json IS NOT NULL " +
                                    "AND NOT EXISTS (SELECT 1 FROM frame_regions r WHERE r.batch_id = f.batch_id AND r.seq = f.seq)",
                r => (Batch: r.GetString(0), Seq: r.GetInt32(1), Json: r.GetString(2)), ("$done", FrameStates.Done));
            foreach (var (batch, seq, json) in missing) IndexRegions(tx, batch, seq, json);
        }),
        new(3, tx => Exec(tx, """
            ALTER TABLE frames ADD COLUMN lease_owner TEXT;
            ALTER TABLE frames ADD COLUMN lease_until TEXT;
            ALTER TABLE frames ADD COLUMN scored_by TEXT;
            CREATE INDEX frames_open ON frames(batch_id, state, seq);
            """)),
        new(4, tx => Exec(tx, """
            ALTER TABLE batches ADD COLUMN callback_owner TEXT;
            ALTER TABLE batches ADD COLUMN callback_until TEXT;
            """)),
        new(5, tx => Exec(tx, """
            CREATE TABLE jobs (
                kind TEXT NOT NULL,
                id TEXT NOT NULL,
                state TEXT NOT NULL,
                created TEXT NOT NULL,
                updated TEXT NOT NULL,
                body TEXT NOT NULL,
                lease_owner TEXT,
                lease_until TEXT,
                PRIMARY KEY (kind, id));
            CREATE INDEX jobs_created ON jobs(kind, created);
            """)),
        new(6, tx => Exec(tx, """
            ALTER TABLE decision_log ADD COLUMN track INTEGER;
            CREATE TABLE track_decisions (
                batch_id TEXT NOT NULL REFERENCES batches(id),
                seq INTEGER NOT NULL,
                track INTEGER NOT NULL,
                verdict TEXT NOT NULL,
                note TEXT,
                decided_by TEXT,
                decided_at TEXT NOT NULL,
                revision INTEGER NOT NULL,
                PRIMARY KEY (batch_id, seq, track),
                FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
            """)),
        new(7, tx => Exec(tx, "ALTER TABLE batches ADD COLUMN artifacts TEXT")),
    ];

    public void IndexRegions(SqliteTransaction tx, string batchId, int seq, string? regionsJson)
    {
        var regions = Manifest.ReadRegions(regionsJson);
        if (regions.Count == 0) return;
        using var cmd = Command(tx, "INSERT OR REPLACE INTO frame_regions (batch_id, seq, region, class_beneath, max_score) VALUES ($id, $seq, $r, $c, $s)",
            ("$id", batchId), ("$seq", seq));
        var pr = cmd.Parameters.Add("$r", SqliteType.Integer);
        var pc = cmd.Parameters.Add("$c", SqliteType.Text);
        var ps = cmd.Parameters.Add("$s", SqliteType.Real);
        foreach (var region in regions)
        {
            pr.Value = region.Id;
            pc.Value = region.IndexedClass;
            ps.Value = RegionIndex.FiniteScore(region.MaxScore);
            cmd.ExecuteNonQuery();
        }
    }
}

/// <summary>What both engines store for a region's score: infinities clamped to the largest finite doubles.</summary>
public static class RegionIndex
{
    public static double FiniteScore(float score) => float.IsFinite(score) ? score : (score > 0 ? double.MaxValue : double.MinValue);
}
