using System.Net.Sockets;
using Npgsql;

namespace Strayspot.Service.Store;

/// <summary>
/// One PostgreSQL database shared by any number of replicas, reached through one connection pool that the batch
/// and decision stores share. Leases are timed by the server's clock, so replicas' clocks need not agree.
/// </summary>
public sealed class PostgresDatabase : IDisposable
{
    /// <summary>Any constant: replicas starting together take turns at the schema steps.</summary>
    private const long MigrationLock = 0x5354_5259_5350_4F54;

    private readonly NpgsqlDataSource _source;
    private readonly TimeProvider _time;

    public PostgresDatabase(string connectionString, TimeProvider time)
    {
        _time = time;
        var builder = new NpgsqlConnectionStringBuilder(connectionString);
        Describe = $"postgres://{builder.Host}:{builder.Port}/{builder.Database}";
        // The stores never change session state, so a pooled connection needs no reset: saves a statement per call.
        builder.NoResetOnClose = true;
        _source = NpgsqlDataSource.Create(builder);
        Run(Migrate);
    }

    public string Describe { get; }

    /// <summary>Why the last call failed to reach the server; null once a call got through again.</summary>
    public string? Problem { get; private set; }

    public int SchemaVersion => Run(c => Convert.ToInt32(Scalar(c, null, "SELECT COALESCE(MAX(version), 0) FROM schema_version"),
        System.Globalization.CultureInfo.InvariantCulture));

    public DateTimeOffset Now() => _time.GetUtcNow().ToUniversalTime();

    /// <summary>Runs <paramref name="body"/> on a pooled connection; a lost or refused connection becomes <see cref="StoreUnavailableException"/>.</summary>
    public T Run<T>(Func<NpgsqlConnection, T> body)
    {
        try
        {
            using var c = _source.OpenConnection();
            var result = body(c);
            Problem = null;
            return result;
        }
        catch (Exception e) when (IsUnavailable(e))
        {
            _source.Clear(); // pooled connections to a restarted server are dead: open fresh ones next time
            Problem = $"The PostgreSQL store at {Describe} cannot be reached: {e.Message}";
            throw new StoreUnavailableException(Problem, e);
        }
    }

    /// <summary>Runs <paramref name="body"/> in one transaction, committed when it returns.</summary>
    public T InTransaction<T>(Func<NpgsqlConnection, NpgsqlTransaction, T> body) => Run(c =>
    {
        using var tx = c.BeginTransaction();
        var result = body(c, tx);
        tx.Commit();
        return result;
    });

    public static NpgsqlCommand Command(NpgsqlConnection c, NpgsqlTransaction? tx, string sql, params (string Name, object? Value)[] args)
    {
        var cmd = new NpgsqlCommand(sql, c, tx);
        foreach (var (n, v) in args) cmd.Parameters.AddWithValue(n, v ?? DBNull.Value);
        return cmd;
    }

    public static int Exec(NpgsqlConnection c, NpgsqlTransaction? tx, string sql, params (string Name, object? Value)[] args)
    {
        using var cmd = Command(c, tx, sql, args);
        return cmd.ExecuteNonQuery();
    }

    public static object? Scalar(NpgsqlConnection c, NpgsqlTransaction? tx, string sql, params (string Name, object? Value)[] args)
    {
        using var cmd = Command(c, tx, sql, args);
        return cmd.ExecuteScalar();
    }

    public static List<T> Query<T>(NpgsqlConnection c, NpgsqlTransaction? tx, string sql, Func<NpgsqlDataReader, T> row,
        params (string Name, object? Value)[] args)
    {
        using var cmd = Command(c, tx, sql, args);
        return DbRows.Read(cmd, row);
    }

    public static string? Str(NpgsqlDataReader r, string column) => DbRows.Str(r, column);

    public static DateTimeOffset Time(NpgsqlDataReader r, string column) => r.GetFieldValue<DateTimeOffset>(r.GetOrdinal(column));

    public void Dispose() => _source.Dispose();

    private static bool IsUnavailable(Exception e) => e switch
    {
        NpgsqlException { IsTransient: true } => true,
        NpgsqlException n when n.InnerException is SocketException or IOException or TimeoutException => true,
        PostgresException p => p.SqlState.StartsWith("08", StringComparison.Ordinal) || p.SqlState.StartsWith("57P", StringComparison.Ordinal),
        SocketException or IOException => true,
        _ => false,
    };

    private int Migrate(NpgsqlConnection c)
    {
        using var tx = c.BeginTransaction();
        Exec(c, tx, "SELECT pg_advisory_xact_lock(@k)", ("k", MigrationLock));
        Exec(c, tx, "CREATE TABLE IF NOT EXISTS schema_version (version integer PRIMARY KEY, name text NOT NULL, applied timestamptz NOT NULL)");
        int have = Convert.ToInt32(Scalar(c, tx, "SELECT COALESCE(MAX(version), 0) FROM schema_version"), System.Globalization.CultureInfo.InvariantCulture);
        if (have > StoreSchema.Latest)
            throw new InvalidOperationException($"The store at {Describe} is at schema version {have}; this build knows up to {StoreSchema.Latest}. Use a newer build.");
        foreach (var step in Steps(c))
        {
            if (step.Version <= have) continue;
            step.Apply(tx);
            Exec(c, tx, "INSERT INTO schema_version (version, name, applied) VALUES (@v, @n, @t)",
                ("v", step.Version), ("n", StoreSchema.Versions.First(v => v.Version == step.Version).Name), ("t", Now()));
        }
        tx.Commit();
        return 0;
    }

    /// <summary>The steps of <see cref="StoreSchema.Versions"/> for PostgreSQL.</summary>
    internal static IReadOnlyList<SchemaStep<NpgsqlTransaction>> Steps(NpgsqlConnection c) =>
    [
        new(1, tx => Exec(c, tx, """
            CREATE TABLE batches (
                id text PRIMARY KEY,
                model text NOT NULL,
                state text NOT NULL,
                source text NOT NULL,
                created timestamptz NOT NULL,
                updated timestamptz NOT NULL,
                frame_count integer NOT NULL DEFAULT 0,
                done_count integer NOT NULL DEFAULT 0,
                failed_count integer NOT NULL DEFAULT 0,
                callback_url text,
                callback_state text,
                callback_attempts integer NOT NULL DEFAULT 0,
                model_sha256 text,
                profile_version text,
                error text);
            CREATE INDEX batches_state ON batches(state, created);
            CREATE TABLE frames (
                batch_id text NOT NULL REFERENCES batches(id),
                seq integer NOT NULL,
                frame_id text NOT NULL,
                source_path text NOT NULL,
                state text NOT NULL,
                frame_score double precision,
                region_count integer,
                report_path text,
                regions_json text,
                error text,
                scored_at timestamptz,
                attempts integer NOT NULL DEFAULT 0,
                PRIMARY KEY (batch_id, seq),
                UNIQUE (batch_id, frame_id));
            CREATE TABLE frame_regions (
                batch_id text NOT NULL,
                seq integer NOT NULL,
                region integer NOT NULL,
                class_beneath text NOT NULL,
                max_score double precision NOT NULL,
                PRIMARY KEY (batch_id, seq, region),
                FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
            CREATE TABLE decision_log (
                revision bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
                batch_id text NOT NULL REFERENCES batches(id),
                seq integer NOT NULL,
                region integer NOT NULL,
                verdict text,
                note text,
                decided_by text,
                decided_at timestamptz NOT NULL);
            CREATE INDEX decision_log_batch ON decision_log(batch_id, revision);
            CREATE TABLE decisions (
                batch_id text NOT NULL REFERENCES batches(id),
                seq integer NOT NULL,
                region integer NOT NULL,
                verdict text NOT NULL,
                note text,
                decided_by text,
                decided_at timestamptz NOT NULL,
                revision bigint NOT NULL,
                PRIMARY KEY (batch_id, seq, region),
                FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
            """)),
        // The region index was written with every done mark from the first PostgreSQL version on: nothing to fill.
        new(2, _ => { }),
        new(3, tx => Exec(c, tx, """
            ALTER TABLE frames ADD COLUMN lease_owner text, ADD COLUMN lease_until timestamptz, ADD COLUMN scored_by text;
            CREATE INDEX frames_open ON frames(batch_id, seq) WHERE state = 'pending';
            """)),
        new(4, tx => Exec(c, tx, "ALTER TABLE batches ADD COLUMN callback_owner text, ADD COLUMN callback_until timestamptz")),
        new(5, tx => Exec(c, tx, """
            CREATE TABLE jobs (
                kind text NOT NULL,
                id text NOT NULL,
                state text NOT NULL,
                created timestamptz NOT NULL,
                updated timestamptz NOT NULL,
                body text NOT NULL,
                lease_owner text,
                lease_until timestamptz,
                PRIMARY KEY (kind, id));
            CREATE INDEX jobs_created ON jobs(kind, created);
            """)),
        new(6, tx => Exec(c, tx, """
            ALTER TABLE decision_log ADD COLUMN track integer;
            CREATE TABLE track_decisions (
                batch_id text NOT NULL REFERENCES batches(id),
                seq integer NOT NULL,
                track integer NOT NULL,
                verdict text NOT NULL,
                note text,
                decided_by text,
                decided_at timestamptz NOT NULL,
                revision bigint NOT NULL,
                PRIMARY KEY (batch_id, seq, track),
                FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
            """)),
        new(7, tx => Exec(c, tx, "ALTER TABLE batches ADD COLUMN artifacts text")),
    ];
}
