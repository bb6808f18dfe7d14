using System.Globalization;
using Microsoft.Data.Sqlite;
using Strayspot.Service.Review;

namespace Strayspot.Service.Batches;

/// <summary>
/// What review needs, in the batch's own database so it lives and moves with it: an index of each scored frame's
/// regions (class beneath and score, so counting a batch never reads every frame's outlines), and decisions. Each target (a region, or the
/// whole frame as region 0) has one current decision; every write is also appended to a log in the same
/// transaction, so concurrent reviewers overwrite each other's current decision (the last write wins) yet no
/// write is lost from the record.
/// </summary>
public sealed partial class BatchStore
{
    /// <summary>Region number that stands for the whole frame in the tables (regions are numbered from 1).</summary>
    private const int WholeFrame = 0;

    private void CreateReviewTables()
    {
        CreateDecisionTables();
        Exec("""
            CREATE TABLE IF NOT EXISTS frame_regions (
                batch_id TEXT NOT NULL,
                seq INTEGER NOT NULL,
                region INTEGER NOT NULL,
                class_beneath TEXT NOT NULL,
                max_score REAL NOT NULL,
                PRIMARY KEY (batch_id, seq, region),
                FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
            """);
        // Frames scored before the index existed: filled once, from their stored regions.
        using var tx = _db.BeginTransaction();
        var missing = Query(tx, "SELECT batch_id, seq, regions_json FROM frames f WHERE state = 'done' AND region_count > 0 AND regions_json IS NOT NULL " +
                                "AND NOT EXISTS (SELECT 1 FROM frame_regions r WHERE r.batch_id = f.batch_id AND r.seq = f.seq)",
            r => (Batch: r.GetString(0), Seq: r.GetInt32(1), Json: r.GetString(2)));
        foreach (var (batch, seq, json) in missing) IndexRegions(tx, batch, seq, json);
        tx.Commit();
    }

    private void IndexRegions(SqliteTransaction tx, string batchId, int seq, string? regionsJson)
    {
        var regions = Manifest.ReadRegions(regionsJson);
        if (regions.Count == 0) return;
        using var cmd = _db.CreateCommand();
        cmd.Transaction = tx;
        cmd.CommandText = "INSERT OR REPLACE INTO frame_regions (batch_id, seq, region, class_beneath, max_score) VALUES ($id, $seq, $r, $c, $s)";
        cmd.Parameters.AddWithValue("$id", batchId);
        cmd.Parameters.AddWithValue("$seq", seq);
        var pr = cmd.Parameters.Add("$r", SqliteType.Integer);
        var pc = cmd.Parameters.Add("$c", SqliteType.Text);
        var ps = cmd.Parameters.Add("$s", SqliteType.Real);
        foreach (var region in regions)
        {
            pr.Value = region.Id;
            pc.Value = region.ClassBeneath;
            ps.Value = float.IsFinite(region.MaxScore) ? region.MaxScore : (region.MaxScore > 0 ? double.MaxValue : double.MinValue);
            cmd.ExecuteNonQuery();
        }
    }

    /// <summary>The regions of a batch's scored frames: class beneath and highest score, by frame then region.</summary>
    public IReadOnlyList<RegionBrief> RegionBriefs(string batchId)
    {
        lock (_gate)
        {
            return Query(null, "SELECT seq, region, class_beneath, max_score FROM frame_regions WHERE batch_id = $id ORDER BY seq, region",
                r => new RegionBrief(r.GetInt32(0), r.GetInt32(1), r.GetString(2), (float)r.GetDouble(3)),
                ("$id", batchId));
        }
    }

    private void CreateDecisionTables() => Exec("""
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
        """);

    /// <summary>Stores <paramref name="verdict"/> as the current decision on the target and logs it; returns what is stored.</summary>
    public Decision Decide(string batchId, int seq, int? region, string verdict, string? note, string? decidedBy)
    {
        lock (_gate)
        {
            using var tx = _db.BeginTransaction();
            string now = Now();
            long revision = Log(tx, batchId, seq, region, verdict, note, decidedBy, now);
            Exec(tx, "INSERT INTO decisions (batch_id, seq, region, verdict, note, decided_by, decided_at, revision) " +
                     "VALUES ($id, $seq, $r, $v, $note, $by, $now, $rev) " +
                     "ON CONFLICT (batch_id, seq, region) DO UPDATE SET verdict = $v, note = $note, decided_by = $by, decided_at = $now, revision = $rev",
                ("$id", batchId), ("$seq", seq), ("$r", region ?? WholeFrame), ("$v", verdict), ("$note", note), ("$by", decidedBy),
                ("$now", now), ("$rev", revision));
            var stored = ReadDecisions(tx, "WHERE d.batch_id = $id AND d.seq = $seq AND d.region = $r",
                ("$id", batchId), ("$seq", seq), ("$r", region ?? WholeFrame))[0];
            tx.Commit();
            return stored;
        }
    }

    /// <summary>Withdraws the current decision on the target (logged); false when there was none.</summary>
    public bool Withdraw(string batchId, int seq, int? region, string? decidedBy)
    {
        lock (_gate)
        {
            using var tx = _db.BeginTransaction();
            int n = Exec(tx, "DELETE FROM decisions WHERE batch_id = $id AND seq = $seq AND region = $r",
                ("$id", batchId), ("$seq", seq), ("$r", region ?? WholeFrame));
            if (n == 1) Log(tx, batchId, seq, region, null, null, decidedBy, Now());
            tx.Commit();
            return n == 1;
        }
    }

    /// <summary>The current decisions of a batch (or of one frame), by frame then region; the frame's own first.</summary>
    public IReadOnlyList<Decision> Decisions(string batchId, int? seq = null)
    {
        lock (_gate)
        {
            return seq is int s
                ? ReadDecisions(null, "WHERE d.batch_id = $id AND d.seq = $seq", ("$id", batchId), ("$seq", s))
                : ReadDecisions(null, "WHERE d.batch_id = $id", ("$id", batchId));
        }
    }

    /// <summary>Every write to the batch's decisions, oldest first, from <paramref name="after"/> on (exclusive).</summary>
    public IReadOnlyList<DecisionEntry> DecisionLog(string batchId, long after = 0, int limit = 1000)
    {
        lock (_gate)
        {
            return Query(null, "SELECT l.*, f.frame_id FROM decision_log l JOIN frames f ON f.batch_id = l.batch_id AND f.seq = l.seq " +
                               "WHERE l.batch_id = $id AND l.revision > $after ORDER BY l.revision LIMIT $limit",
                r => new DecisionEntry(r.GetInt64(r.GetOrdinal("revision")), r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")),
                    Target(r.GetInt32(r.GetOrdinal("region"))), Str(r, "verdict"), Str(r, "note"), Str(r, "decided_by"),
                    ParseTime(r.GetString(r.GetOrdinal("decided_at")))),
                ("$id", batchId), ("$after", after), ("$limit", limit));
        }
    }

    private long Log(SqliteTransaction tx, string batchId, int seq, int? region, string? verdict, string? note, string? decidedBy, string now)
    {
        Exec(tx, "INSERT INTO decision_log (batch_id, seq, region, verdict, note, decided_by, decided_at) VALUES ($id, $seq, $r, $v, $note, $by, $now)",
            ("$id", batchId), ("$seq", seq), ("$r", region ?? WholeFrame), ("$v", verdict), ("$note", note), ("$by", decidedBy), ("$now", now));
        return Convert.ToInt64(Scalar(tx, "SELECT last_insert_rowid()"), CultureInfo.InvariantCulture);
    }

    private List<Decision> ReadDecisions(SqliteTransaction? tx, string where, params (string Name, object? Value)[] args) =>
        Query(tx, "SELECT d.*, f.frame_id FROM decisions d JOIN frames f ON f.batch_id = d.batch_id AND f.seq = d.seq " + where +
                  " ORDER BY d.seq, d.region",
            r => new Decision(r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")), Target(r.GetInt32(r.GetOrdinal("region"))),
                r.GetString(r.GetOrdinal("verdict")), Str(r, "note"), Str(r, "decided_by"),
                ParseTime(r.GetString(r.GetOrdinal("decided_at"))), r.GetInt64(r.GetOrdinal("revision"))),
            args);

    /// <summary>The region a stored row names, null for the whole frame.</summary>
    private static int? Target(int region) => region == WholeFrame ? null : region;
}
