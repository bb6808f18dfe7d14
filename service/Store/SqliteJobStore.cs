using Microsoft.Data.Sqlite;

namespace Strayspot.Service.Store;

/// <summary>Job records in the SQLite file. One process uses the file, so claims only matter within it (and are void at open).</summary>
public sealed class SqliteJobStore(SqliteDatabase db) : IJobStore
{
    private const string Columns = "kind, id, state, created, body";

    public bool Add(JobRecord job, string? owner = null, TimeSpan lease = default)
    {
        lock (db.Gate)
            return db.Exec(null, "INSERT OR IGNORE INTO jobs (kind, id, state, created, updated, body, lease_owner, lease_until) " +
                                 "VALUES ($k, $id, $s, $c, $now, $b, $o, $until)",
                ("$k", job.Kind), ("$id", job.Id), ("$s", job.State), ("$c", SqliteDatabase.Format(job.Created)), ("$now", db.Now()),
                ("$b", job.Body), ("$o", owner), ("$until", owner is null ? null : Until(lease))) == 1;
    }

    public JobRecord? Get(string kind, string id)
    {
        lock (db.Gate)
            return db.Query(null, $"SELECT {Columns} FROM jobs WHERE kind = $k AND id = $id", Read, ("$k", kind), ("$id", id)).FirstOrDefault();
    }

    public IReadOnlyList<JobRecord> List(string kind, int limit = 1000)
    {
        lock (db.Gate)
            return db.Query(null, $"SELECT {Columns} FROM jobs WHERE kind = $k ORDER BY created DESC, id LIMIT $n", Read, ("$k", kind), ("$n", limit));
    }

    public bool Save(JobRecord job, string owner, bool release = false)
    {
        lock (db.Gate)
            return db.Exec(null, "UPDATE jobs SET state = $s, body = $b, updated = $now, " +
                                 "lease_owner = CASE WHEN $release THEN NULL ELSE lease_owner END, " +
                                 "lease_until = CASE WHEN $release THEN NULL ELSE lease_until END " +
                                 "WHERE kind = $k AND id = $id AND (lease_owner IS NULL OR lease_owner = $o OR lease_until < $now)",
                ("$s", job.State), ("$b", job.Body), ("$now", db.Now()), ("$release", release), ("$k", job.Kind), ("$id", job.Id), ("$o", owner)) == 1;
    }

    public JobRecord? ClaimNext(string kind, IReadOnlyList<string> runnable, string owner, TimeSpan lease)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            string now = db.Now();
            var states = runnable.Select((s, i) => ($"$s{i}", (object?)s)).ToArray();
            var job = db.Query(tx, $"SELECT {Columns} FROM jobs WHERE kind = $k AND state IN ({string.Join(", ", states.Select(s => s.Item1))}) " +
                                   "AND (lease_until IS NULL OR lease_until < $now) ORDER BY created, id LIMIT 1", Read,
                [("$k", kind), ("$now", now), .. states]).FirstOrDefault();
            if (job is null) return null;
            db.Exec(tx, "UPDATE jobs SET lease_owner = $o, lease_until = $until WHERE kind = $k AND id = $id",
                ("$o", owner), ("$until", Until(lease)), ("$k", kind), ("$id", job.Id));
            tx.Commit();
            return job;
        }
    }

    public bool Renew(string kind, string id, string owner, TimeSpan lease)
    {
        lock (db.Gate)
            return db.Exec(null, "UPDATE jobs SET lease_until = $until WHERE kind = $k AND id = $id AND lease_owner = $o",
                ("$until", Until(lease)), ("$k", kind), ("$id", id), ("$o", owner)) == 1;
    }

    private static JobRecord Read(SqliteDataReader r) =>
        new(r.GetString(0), r.GetString(1), r.GetString(2), SqliteDatabase.ParseTime(r.GetString(3)), r.GetString(4));

    private string Until(TimeSpan lease) => SqliteDatabase.Format(SqliteDatabase.ParseTime(db.Now()) + lease);
}
