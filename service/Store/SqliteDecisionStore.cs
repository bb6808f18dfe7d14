using System.Globalization;
using Microsoft.Data.Sqlite;
using Strayspot.Service.Review;

namespace Strayspot.Service.Store;

/// <summary>Decisions and their log in the batch's SQLite file, so they live and move with it.</summary>
public sealed class SqliteDecisionStore(SqliteDatabase db) : IDecisionStore
{
    public Decision Decide(string batchId, int seq, int? region, string verdict, string? note, string? decidedBy)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            string now = db.Now();
            long revision = Log(tx, batchId, seq, region, verdict, note, decidedBy, now);
            db.Exec(tx, "INSERT INTO decisions (batch_id, seq, region, verdict, note, decided_by, decided_at, revision) " +
                        "VALUES ($id, $seq, $r, $v, $note, $by, $now, $rev) " +
                        "ON CONFLICT (batch_id, seq, region) DO UPDATE SET verdict = $v, note = $note, decided_by = $by, decided_at = $now, revision = $rev",
                ("$id", batchId), ("$seq", seq), ("$r", region ?? DecisionTargets.WholeFrame), ("$v", verdict), ("$note", note), ("$by", decidedBy),
                ("$now", now), ("$rev", revision));
            var stored = Read(tx, "WHERE d.batch_id = $id AND d.seq = $seq AND d.region = $r",
                ("$id", batchId), ("$seq", seq), ("$r", region ?? DecisionTargets.WholeFrame))[0];
            tx.Commit();
            return stored;
        }
    }

    public bool Withdraw(string batchId, int seq, int? region, string? decidedBy)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            int n = db.Exec(tx, "DELETE FROM decisions WHERE batch_id = $id AND seq = $seq AND region = $r",
                ("$id", batchId), ("$seq", seq), ("$r", region ?? DecisionTargets.WholeFrame));
            if (n == 1) Log(tx, batchId, seq, region, null, null, decidedBy, db.Now());
            tx.Commit();
            return n == 1;
        }
    }

    public Decision DecideTrack(string batchId, int seq, int track, string verdict, string? note, string? decidedBy)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            string now = db.Now();
            long revision = Log(tx, batchId, seq, null, verdict, note, decidedBy, now, track);
            db.Exec(tx, "INSERT INTO track_decisions (batch_id, seq, track, verdict, note, decided_by, decided_at, revision) " +
                        "VALUES ($id, $seq, $t, $v, $note, $by, $now, $rev) " +
                        "ON CONFLICT (batch_id, seq, track) DO UPDATE SET verdict = $v, note = $note, decided_by = $by, decided_at = $now, revision = $rev",
                ("$id", batchId), ("$seq", seq), ("$t", track), ("$v", verdict), ("$note", note), ("$by", decidedBy), ("$now", now), ("$rev", revision));
            var stored = ReadTracks(tx, "WHERE d.batch_id = $id AND d.seq = $seq AND d.track = $t", ("$id", batchId), ("$seq", seq), ("$t", track))[0];
            tx.Commit();
            return stored;
        }
    }

    public bool WithdrawTrack(string batchId, int seq, int track, string? decidedBy)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            int n = db.Exec(tx, "DELETE FROM track_decisions WHERE batch_id = $id AND seq = $seq AND track = $t",
                ("$id", batchId), ("$seq", seq), ("$t", track));
            if (n == 1) Log(tx, batchId, seq, null, null, null, decidedBy, db.Now(), track);
            tx.Commit();
            return n == 1;
        }
    }

    public IReadOnlyList<Decision> CurrentTracks(string batchId, int? seq = null)
    {
        lock (db.Gate)
            return ReadTracks(null, "WHERE d.batch_id = $id AND ($seq IS NULL OR d.seq = $seq)", ("$id", batchId), ("$seq", seq));
    }

    public IReadOnlyList<Decision> Current(string batchId, int? seq = null)
    {
        lock (db.Gate)
            return Read(null, "WHERE d.batch_id = $id AND ($seq IS NULL OR d.seq = $seq)", ("$id", batchId), ("$seq", seq));
    }

    public IReadOnlyList<DecisionEntry> Log(string batchId, long after = 0, int limit = 1000)
    {
        lock (db.Gate)
        {
            return db.Query(null, "SELECT l.*, f.frame_id FROM decision_log l JOIN frames f ON f.batch_id = l.batch_id AND f.seq = l.seq " +
                                  "WHERE l.batch_id = $id AND l.revision > $after ORDER BY l.revision LIMIT $limit",
                r => new DecisionEntry(r.GetInt64(r.GetOrdinal("revision")), r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")),
                    DecisionTargets.Region(r.GetInt32(r.GetOrdinal("region"))), SqliteDatabase.Str(r, "verdict"), SqliteDatabase.Str(r, "note"),
                    SqliteDatabase.Str(r, "decided_by"), SqliteDatabase.ParseTime(r.GetString(r.GetOrdinal("decided_at"))), DecisionTargets.Track(r)),
                ("$id", batchId), ("$after", after), ("$limit", limit));
        }
    }

    private long Log(SqliteTransaction tx, string batchId, int seq, int? region, string? verdict, string? note, string? decidedBy, string now,
        int? track = null)
    {
        db.Exec(tx, "INSERT INTO decision_log (batch_id, seq, region, verdict, note, decided_by, decided_at, track) VALUES ($id, $seq, $r, $v, $note, $by, $now, $t)",
            ("$id", batchId), ("$seq", seq), ("$r", region ?? DecisionTargets.WholeFrame), ("$v", verdict), ("$note", note), ("$by", decidedBy), ("$now", now),
            ("$t", track));
        return Convert.ToInt64(db.Scalar(tx, "SELECT last_insert_rowid()"), CultureInfo.InvariantCulture);
    }

    private List<Decision> Read(SqliteTransaction? tx, string where, params (string Name, object? Value)[] args) =>
        db.Query(tx, "SELECT d.*, f.frame_id FROM decisions d JOIN frames f ON f.batch_id = d.batch_id AND f.seq = d.seq " + where +
                     " ORDER BY d.seq, d.region",
            r => new Decision(r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")),
                DecisionTargets.Region(r.GetInt32(r.GetOrdinal("region"))), r.GetString(r.GetOrdinal("verdict")), SqliteDatabase.Str(r, "note"),
                SqliteDatabase.Str(r, "decided_by"), SqliteDatabase.ParseTime(r.GetString(r.GetOrdinal("decided_at"))), r.GetInt64(r.GetOrdinal("revision"))),
            args);

    private List<Decision> ReadTracks(SqliteTransaction? tx, string where, params (string Name, object? Value)[] args) =>
        db.Query(tx, "SELECT d.*, f.frame_id FROM track_decisions d JOIN frames f ON f.batch_id = d.batch_id AND f.seq = d.seq " + where +
                     " ORDER BY d.seq, d.track",
            r => new Decision(r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")), null, r.GetString(r.GetOrdinal("verdict")),
                SqliteDatabase.Str(r, "note"), SqliteDatabase.Str(r, "decided_by"), SqliteDatabase.ParseTime(r.GetString(r.GetOrdinal("decided_at"))),
                r.GetInt64(r.GetOrdinal("revision")), r.GetInt32(r.GetOrdinal("track"))),
            args);
}

/// <summary>
/// How both engines store a decision's target: region numbers from 1, and 0 for the whole frame. A track decision is
/// kept in its own table; its log entry has region 0 and the track in the log's <c>track</c> column.
/// </summary>
public static class DecisionTargets
{
    public const int WholeFrame = 0;

    /// <summary>The region a stored row names, null for the whole frame.</summary>
    public static int? Region(int stored) => stored == WholeFrame ? null : stored;

    /// <summary>The track a log row names, null for a region or frame decision.</summary>
    public static int? Track(System.Data.Common.DbDataReader r)
    {
        int i = r.GetOrdinal("track");
        return r.IsDBNull(i) ? null : r.GetInt32(i);
    }
}
