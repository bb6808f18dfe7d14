using Npgsql;

namespace Strayspot.Service.Store;

/// <summary>
/// Job records in PostgreSQL, seen by every replica. A claim takes the oldest runnable job nobody holds with
/// <c>FOR UPDATE SKIP LOCKED</c> and stamps owner and expiry on the server's clock, as frame claims do.
/// </summary>
public sealed class PostgresJobStore(PostgresDatabase db) : IJobStore
{
    private const string Columns = "kind, id, state, created, body";

    public bool Add(JobRecord job, string? owner = null, TimeSpan lease = default) => db.Run(c => PostgresDatabase.Exec(c, null,
        "INSERT INTO jobs (kind, id, state, created, updated, body, lease_owner, lease_until) " +
        $"VALUES (@k, @id, @s, @c, @now, @b, @o, {(owner is null ? "NULL" : "now() + @lease")}) ON CONFLICT (kind, id) DO NOTHING",
        ("k", job.Kind), ("id", job.Id), ("s", job.State), ("c", job.Created.ToUniversalTime()), ("now", db.Now()), ("b", job.Body),
        ("o", owner), ("lease", lease)) == 1);

    public JobRecord? Get(string kind, string id) => db.Run(c => PostgresDatabase.Query(c, null,
        $"SELECT {Columns} FROM jobs WHERE kind = @k AND id = @id", Read, ("k", kind), ("id", id)).FirstOrDefault());

    public IReadOnlyList<JobRecord> List(string kind, int limit = 1000) => db.Run(c => PostgresDatabase.Query(c, null,
        $"SELECT {Columns} FROM jobs WHERE kind = @k ORDER BY created DESC, id LIMIT @n", Read, ("k", kind), ("n", limit)));

    public bool Save(JobRecord job, string owner, bool release = false) => db.Run(c => PostgresDatabase.Exec(c, null, """
        UPDATE jobs SET state = @s, body = @b, updated = @now,
            lease_owner = CASE WHEN @release THEN NULL ELSE lease_owner END,
            lease_until = CASE WHEN @release THEN NULL ELSE lease_until END
        WHERE kind = @k AND id = @id AND (lease_owner IS NULL OR lease_owner = @o OR lease_until < now())
        """, ("s", job.State), ("b", job.Body), ("now", db.Now()), ("release", release), ("k", job.Kind), ("id", job.Id), ("o", owner)) == 1);

    public JobRecord? ClaimNext(string kind, IReadOnlyList<string> runnable, string owner, TimeSpan lease) => db.Run(c => PostgresDatabase.Query(c, null, $"""
        UPDATE jobs j SET lease_owner = @o, lease_until = now() + @lease
        FROM (SELECT kind, id FROM jobs WHERE kind = @k AND state = ANY(@states) AND (lease_until IS NULL OR lease_until < now())
              ORDER BY created, id LIMIT 1 FOR UPDATE SKIP LOCKED) pick
        WHERE j.kind = pick.kind AND j.id = pick.id
        RETURNING {string.Join(", ", Columns.Split(", ").Select(col => "j." + col))}
        """, Read, ("o", owner), ("lease", lease), ("k", kind), ("states", runnable.ToArray())).FirstOrDefault());

    public bool Renew(string kind, string id, string owner, TimeSpan lease) => db.Run(c => PostgresDatabase.Exec(c, null,
        "UPDATE jobs SET lease_until = now() + @lease WHERE kind = @k AND id = @id AND lease_owner = @o",
        ("lease", lease), ("k", kind), ("id", id), ("o", owner)) == 1);

    private static JobRecord Read(NpgsqlDataReader r) =>
        new(r.GetString(0), r.GetString(1), r.GetString(2), r.GetFieldValue<DateTimeOffset>(3), r.GetString(4));
}
