using Strayspot.Service.Review;

namespace Strayspot.Service.Store;

/// <summary>
/// Decisions in PostgreSQL, seen by every replica. A decision and its log entry are one statement; the current
/// decision keeps the highest revision, so two replicas writing at once end with the later write, as on one box.
/// </summary>
public sealed class PostgresDecisionStore(PostgresDatabase db) : IDecisionStore
{
    public Decision Decide(string batchId, int seq, int? region, string verdict, string? note, string? decidedBy)
    {
        int target = region ?? DecisionTargets.WholeFrame;
        return db.InTransaction((c, tx) =>
        {
            PostgresDatabase.Exec(c, tx, """
                WITH l AS (INSERT INTO decision_log (batch_id, seq, region, verdict, note, decided_by, decided_at)
                           VALUES (@id, @seq, @r, @v, @note, @by, @now) RETURNING revision)
                INSERT INTO decisions (batch_id, seq, region, verdict, note, decided_by, decided_at, revision)
                SELECT @id, @seq, @r, @v, @note, @by, @now, l.revision FROM l
                ON CONFLICT (batch_id, seq, region) DO UPDATE SET verdict = EXCLUDED.verdict, note = EXCLUDED.note,
                    decided_by = EXCLUDED.decided_by, decided_at = EXCLUDED.decided_at, revision = EXCLUDED.revision
                WHERE decisions.revision < EXCLUDED.revision
                """, ("id", batchId), ("seq", seq), ("r", target), ("v", verdict), ("note", note), ("by", decidedBy), ("now", db.Now()));
            return Read(c, tx, "WHERE d.batch_id = @id AND d.seq = @seq AND d.region = @r", ("id", batchId), ("seq", seq), ("r", target))[0];
        });
    }

    public bool Withdraw(string batchId, int seq, int? region, string? decidedBy) => db.Run(c => PostgresDatabase.Exec(c, null, """
        WITH d AS (DELETE FROM decisions WHERE batch_id = @id AND seq = @seq AND region = @r RETURNING 1)
        INSERT INTO decision_log (batch_id, seq, region, verdict, note, decided_by, decided_at)
        SELECT @id, @seq, @r, NULL, NULL, @by, @now WHERE EXISTS (SELECT 1 FROM d)
        """, ("id", batchId), ("seq", seq), ("r", region ?? DecisionTargets.WholeFrame), ("by", decidedBy), ("now", db.Now())) == 1);

    public Decision DecideTrack(string batchId, int seq, int track, string verdict, string? note, string? decidedBy) => db.InTransaction((c, tx) =>
    {
        PostgresDatabase.Exec(c, tx, """
            WITH l AS (INSERT INTO decision_log (batch_id, seq, region, verdict, note, decided_by, decided_at, track)
                       VALUES (@id, @seq, 0, @v, @note, @by, @now, @t) RETURNING revision)
            INSERT INTO track_decisions (batch_id, seq, track, verdict, note, decided_by, decided_at, revision)
            SELECT @id, @seq, @t, @v, @note, @by, @now, l.revision FROM l
            ON CONFLICT (batch_id, seq, track) DO UPDATE SET verdict = EXCLUDED.verdict, note = EXCLUDED.note,
                decided_by = EXCLUDED.decided_by, decided_at = EXCLUDED.decided_at, revision = EXCLUDED.revision
            WHERE track_decisions.revision < EXCLUDED.revision
            """, ("id", batchId), ("seq", seq), ("t", track), ("v", verdict), ("note", note), ("by", decidedBy), ("now", db.Now()));
        return ReadTracks(c, tx, "WHERE d.batch_id = @id AND d.seq = @seq AND d.track = @t", ("id", batchId), ("seq", seq), ("t", track))[0];
    });

    public bool WithdrawTrack(string batchId, int seq, int track, string? decidedBy) => db.Run(c => PostgresDatabase.Exec(c, null, """
        WITH d AS (DELETE FROM track_decisions WHERE batch_id = @id AND seq = @seq AND track = @t RETURNING 1)
        INSERT INTO decision_log (batch_id, seq, region, verdict, note, decided_by, decided_at, track)
        SELECT @id, @seq, 0, NULL, NULL, @by, @now, @t WHERE EXISTS (SELECT 1 FROM d)
        """, ("id", batchId), ("seq", seq), ("t", track), ("by", decidedBy), ("now", db.Now())) == 1);

    public IReadOnlyList<Decision> CurrentTracks(string batchId, int? seq = null) =>
        db.Run(c => ReadTracks(c, null, "WHERE d.batch_id = @id AND (@seq::integer IS NULL OR d.seq = @seq)", ("id", batchId), ("seq", seq)));

    public IReadOnlyList<Decision> Current(string batchId, int? seq = null) =>
        db.Run(c => Read(c, null, "WHERE d.batch_id = @id AND (@seq::integer IS NULL OR d.seq = @seq)", ("id", batchId), ("seq", seq)));

    public IReadOnlyList<DecisionEntry> Log(string batchId, long after = 0, int limit = 1000) => db.Run(c => PostgresDatabase.Query(c, null,
        "SELECT l.*, f.frame_id FROM decision_log l JOIN frames f ON f.batch_id = l.batch_id AND f.seq = l.seq " +
        "WHERE l.batch_id = @id AND l.revision > @after ORDER BY l.revision LIMIT @limit",
        r => new DecisionEntry(r.GetInt64(r.GetOrdinal("revision")), r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")),
            DecisionTargets.Region(r.GetInt32(r.GetOrdinal("region"))), PostgresDatabase.Str(r, "verdict"), PostgresDatabase.Str(r, "note"),
            PostgresDatabase.Str(r, "decided_by"), PostgresDatabase.Time(r, "decided_at"), DecisionTargets.Track(r)),
        ("id", batchId), ("after", after), ("limit", limit)));

    private static List<Decision> Read(Npgsql.NpgsqlConnection c, Npgsql.NpgsqlTransaction? tx, string where, params (string Name, object? Value)[] args) =>
        PostgresDatabase.Query(c, tx, "SELECT d.*, f.frame_id FROM decisions d JOIN frames f ON f.batch_id = d.batch_id AND f.seq = d.seq " + where +
                                      " ORDER BY d.seq, d.region",
            r => new Decision(r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")),
                DecisionTargets.Region(r.GetInt32(r.GetOrdinal("region"))), r.GetString(r.GetOrdinal("verdict")), PostgresDatabase.Str(r, "note"),
                PostgresDatabase.Str(r, "decided_by"), PostgresDatabase.Time(r, "decided_at"), r.GetInt64(r.GetOrdinal("revision"))),
            args);

    private static List<Decision> ReadTracks(Npgsql.NpgsqlConnection c, Npgsql.NpgsqlTransaction? tx, string where, params (string Name, object? Value)[] args) =>
        PostgresDatabase.Query(c, tx, "SELECT d.*, f.frame_id FROM track_decisions d JOIN frames f ON f.batch_id = d.batch_id AND f.seq = d.seq " + where +
                                      " ORDER BY d.seq, d.track",
            r => new Decision(r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")), null, r.GetString(r.GetOrdinal("verdict")),
                PostgresDatabase.Str(r, "note"), PostgresDatabase.Str(r, "decided_by"), PostgresDatabase.Time(r, "decided_at"),
                r.GetInt64(r.GetOrdinal("revision")), r.GetInt32(r.GetOrdinal("track"))),
            args);
}
