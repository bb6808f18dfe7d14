using System.Globalization;
using Microsoft.Data.Sqlite;
using Strayspot.Service.Batches;

namespace Strayspot.Service.Store;

/// <summary>
/// Batches and frames in the SQLite file. A frame is marked done only after its files are in place, in one
/// transaction with its summary and the batch counts, so a crash at any point leaves either a done frame with its
/// outputs or a pending one that is scored again.
/// </summary>
public sealed class SqliteBatchStore(SqliteDatabase db) : IBatchStore
{
    public bool Shared => false;

    public (BatchRecord Batch, bool Created, int Added) Submit(string id, string model, string source, string? callbackUrl,
        IReadOnlyList<NewFrame> frames, string? artifacts = null)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            string now = db.Now();
            bool created = GetLocked(id, tx) is null;
            if (created)
            {
                db.Exec(tx, "INSERT INTO batches (id, model, state, source, created, updated, callback_url, artifacts) VALUES ($id, $m, $state, $s, $now, $now, $cb, $a)",
                    ("$id", id), ("$m", model), ("$state", BatchStates.Queued), ("$s", source), ("$now", now), ("$cb", callbackUrl), ("$a", artifacts));
            }
            int next = Convert.ToInt32(db.Scalar(tx, "SELECT COALESCE(MAX(seq), 0) FROM frames WHERE batch_id = $id", ("$id", id)), CultureInfo.InvariantCulture);
            int added = 0;
            using (var cmd = db.Command(tx, "INSERT OR IGNORE INTO frames (batch_id, seq, frame_id, source_path, state) VALUES ($id, $seq, $f, $p, $pending)",
                       ("$id", id), ("$pending", FrameStates.Pending)))
            {
                var pSeq = cmd.Parameters.Add("$seq", SqliteType.Integer);
                var pF = cmd.Parameters.Add("$f", SqliteType.Text);
                var pP = cmd.Parameters.Add("$p", SqliteType.Text);
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
                db.Exec(tx, "UPDATE batches SET frame_count = frame_count + $n, updated = $now, " +
                            "callback_state = CASE WHEN state = $done THEN NULL ELSE callback_state END, " +
                            "state = CASE WHEN state = $done THEN $queued ELSE state END WHERE id = $id",
                    ("$n", added), ("$now", now), ("$id", id), ("$done", BatchStates.Done), ("$queued", BatchStates.Queued));
            }
            var batch = GetLocked(id, tx)!;
            tx.Commit();
            return (batch, created, added);
        }
    }

    public BatchRecord? Get(string id)
    {
        lock (db.Gate) return GetLocked(id, null);
    }

    public IReadOnlyList<BatchRecord> List(int limit = 100, string? state = null)
    {
        lock (db.Gate)
            return db.Query(null, "SELECT * FROM batches WHERE ($state IS NULL OR state = $state) ORDER BY created DESC, id LIMIT $limit", ReadBatch,
                ("$state", state), ("$limit", limit));
    }

    public IReadOnlyList<BatchRecord> Runnable()
    {
        lock (db.Gate)
            return db.Query(null, "SELECT * FROM batches WHERE state IN ($queued, $running) ORDER BY state = $queued, created, id", ReadBatch,
                ("$queued", BatchStates.Queued), ("$running", BatchStates.Running));
    }

    public IReadOnlyList<BatchRecord> CallbacksDue()
    {
        lock (db.Gate)
            return db.Query(null, "SELECT * FROM batches WHERE callback_state = $pending ORDER BY updated", ReadBatch, ("$pending", CallbackStates.Pending));
    }

    public bool Transition(string id, string to, IReadOnlyList<string> from, string? error = null, string? modelSha256 = null,
        string? profileVersion = null)
    {
        lock (db.Gate)
        {
            // The allowed states as one JSON parameter: no SQL is built from values.
            return db.Exec(null, "UPDATE batches SET state = $to, updated = $now, error = COALESCE($err, error), " +
                                 "model_sha256 = COALESCE($sha, model_sha256), profile_version = COALESCE($pv, profile_version), " +
                                 "callback_state = CASE WHEN $finished AND callback_url IS NOT NULL THEN $cbPending WHEN $finished THEN NULL ELSE callback_state END " +
                                 "WHERE id = $id AND state IN (SELECT value FROM json_each($from))",
                ("$to", to), ("$now", db.Now()), ("$err", error), ("$sha", modelSha256), ("$pv", profileVersion),
                ("$finished", BatchStates.IsFinished(to)), ("$cbPending", CallbackStates.Pending), ("$id", id),
                ("$from", System.Text.Json.JsonSerializer.Serialize(from))) == 1;
        }
    }

    public bool FinishIfComplete(string id)
    {
        lock (db.Gate)
        {
            return db.Exec(null, "UPDATE batches SET state = $done, updated = $now, " +
                                 "callback_state = CASE WHEN callback_url IS NULL THEN NULL ELSE $cbPending END " +
                                 "WHERE id = $id AND state = $running AND NOT EXISTS (SELECT 1 FROM frames WHERE batch_id = $id AND state = $pending)",
                ("$done", BatchStates.Done), ("$now", db.Now()), ("$cbPending", CallbackStates.Pending), ("$id", id),
                ("$running", BatchStates.Running), ("$pending", FrameStates.Pending)) == 1;
        }
    }

    public IReadOnlyList<FrameRecord> Frames(string batchId, string? state = null)
    {
        lock (db.Gate)
            return db.Query(null, "SELECT * FROM frames WHERE batch_id = $id AND ($state IS NULL OR state = $state) ORDER BY seq", ReadFrame,
                ("$id", batchId), ("$state", state));
    }

    /// <summary>
    /// Only columns stored before a frame's regions are read: SQLite reaches later ones through the regions' overflow
    /// pages, which made a listing of a large batch ten times slower.
    /// </summary>
    public IReadOnlyList<FrameSummary> FrameSummaries(string batchId)
    {
        lock (db.Gate)
            return db.Query(null, "SELECT seq, frame_id, state, frame_score, region_count FROM frames WHERE batch_id = $id ORDER BY seq",
                r => new FrameSummary(r.GetInt32(0), r.GetString(1), r.GetString(2), r.IsDBNull(3) ? null : (float)r.GetDouble(3),
                    r.IsDBNull(4) ? null : r.GetInt32(4)),
                ("$id", batchId));
    }

    public FrameRecord? Frame(string batchId, int seq)
    {
        lock (db.Gate)
            return db.Query(null, "SELECT * FROM frames WHERE batch_id = $id AND seq = $seq", ReadFrame, ("$id", batchId), ("$seq", seq)).FirstOrDefault();
    }

    public FrameClaim? ClaimNextFrame(string batchId, string owner, TimeSpan lease)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            string now = db.Now();
            var frame = db.Query(tx, "SELECT f.* FROM frames f JOIN batches b ON b.id = f.batch_id WHERE f.batch_id = $id AND b.state = $running " +
                                     "AND f.state = $pending AND (f.lease_until IS NULL OR f.lease_until < $now) ORDER BY f.seq LIMIT 1", ReadFrame,
                ("$id", batchId), ("$running", BatchStates.Running), ("$pending", FrameStates.Pending), ("$now", now)).FirstOrDefault();
            if (frame is null) return null;
            db.Exec(tx, "UPDATE frames SET attempts = attempts + 1, lease_owner = $o, lease_until = $until WHERE batch_id = $id AND seq = $seq",
                ("$o", owner), ("$until", Until(lease)), ("$id", batchId), ("$seq", frame.Seq));
            tx.Commit();
            return new FrameClaim(frame with { Attempts = frame.Attempts + 1 }, owner);
        }
    }

    public bool RenewClaim(FrameClaim claim, TimeSpan lease)
    {
        lock (db.Gate)
            return db.Exec(null, "UPDATE frames SET lease_until = $until WHERE batch_id = $id AND seq = $seq AND state = $pending AND lease_owner = $o",
                ("$until", Until(lease)), ("$id", claim.BatchId), ("$seq", claim.Seq), ("$pending", FrameStates.Pending), ("$o", claim.Owner)) == 1;
    }

    public bool CompleteFrame(FrameClaim claim, FrameResult result)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            string now = db.Now();
            int n = db.Exec(tx, "UPDATE frames SET state = $doneF, frame_score = $score, region_count = $rc, report_path = $rp, " +
                                "regions_json = $rj, error = NULL, scored_at = $now, scored_by = lease_owner, lease_owner = NULL, lease_until = NULL " +
                                "WHERE batch_id = $id AND seq = $seq AND state = $pending AND lease_owner = $o",
                ("$doneF", FrameStates.Done), ("$score", (double)result.FrameScore), ("$rc", result.RegionCount), ("$rp", result.ReportPath),
                ("$rj", result.RegionsJson), ("$now", now), ("$id", claim.BatchId), ("$seq", claim.Seq), ("$pending", FrameStates.Pending),
                ("$o", claim.Owner));
            if (n == 1)
            {
                db.Exec(tx, "UPDATE batches SET done_count = done_count + 1, updated = $now WHERE id = $id", ("$now", now), ("$id", claim.BatchId));
                db.IndexRegions(tx, claim.BatchId, claim.Seq, result.RegionsJson);
            }
            tx.Commit();
            return n == 1;
        }
    }

    public bool FailFrame(FrameClaim claim, string error)
    {
        lock (db.Gate)
        {
            using var tx = db.Begin();
            string now = db.Now();
            int n = db.Exec(tx, "UPDATE frames SET state = $failed, error = $err, scored_at = $now, scored_by = lease_owner, lease_owner = NULL, lease_until = NULL " +
                                "WHERE batch_id = $id AND seq = $seq AND state = $pending AND lease_owner = $o",
                ("$failed", FrameStates.Failed), ("$err", error), ("$now", now), ("$id", claim.BatchId), ("$seq", claim.Seq),
                ("$pending", FrameStates.Pending), ("$o", claim.Owner));
            if (n == 1)
                db.Exec(tx, "UPDATE batches SET failed_count = failed_count + 1, updated = $now WHERE id = $id", ("$now", now), ("$id", claim.BatchId));
            tx.Commit();
            return n == 1;
        }
    }

    public void RecordCallback(string id, string state, int attempts)
    {
        lock (db.Gate)
            db.Exec(null, "UPDATE batches SET callback_state = $s, callback_attempts = $a WHERE id = $id", ("$s", state), ("$a", attempts), ("$id", id));
    }

    public bool ClaimCallback(string id, string owner, TimeSpan lease)
    {
        lock (db.Gate)
            return db.Exec(null, "UPDATE batches SET callback_owner = $o, callback_until = $until WHERE id = $id AND callback_state = $pending " +
                                 "AND (callback_owner IS NULL OR callback_owner = $o OR callback_until < $now)",
                ("$o", owner), ("$until", Until(lease)), ("$id", id), ("$pending", CallbackStates.Pending), ("$now", db.Now())) == 1;
    }

    public IReadOnlyList<RegionBrief> RegionBriefs(string batchId)
    {
        lock (db.Gate)
            return db.Query(null, "SELECT seq, region, class_beneath, max_score FROM frame_regions WHERE batch_id = $id ORDER BY seq, region",
                r => new RegionBrief(r.GetInt32(0), r.GetInt32(1), r.GetString(2), (float)r.GetDouble(3)), ("$id", batchId));
    }

    public void Ping()
    {
        lock (db.Gate) db.Scalar(null, "SELECT 1");
    }

    private string Until(TimeSpan lease) => SqliteDatabase.Format(SqliteDatabase.ParseTime(db.Now()) + lease);

    private BatchRecord? GetLocked(string id, SqliteTransaction? tx) =>
        db.Query(tx, "SELECT * FROM batches WHERE id = $id", ReadBatch, ("$id", id)).FirstOrDefault();

    private static BatchRecord ReadBatch(SqliteDataReader r) => new(
        r.GetString(r.GetOrdinal("id")), r.GetString(r.GetOrdinal("model")), r.GetString(r.GetOrdinal("state")),
        r.GetString(r.GetOrdinal("source")),
        SqliteDatabase.ParseTime(r.GetString(r.GetOrdinal("created"))), SqliteDatabase.ParseTime(r.GetString(r.GetOrdinal("updated"))),
        r.GetInt32(r.GetOrdinal("frame_count")), r.GetInt32(r.GetOrdinal("done_count")), r.GetInt32(r.GetOrdinal("failed_count")),
        SqliteDatabase.Str(r, "callback_url"), SqliteDatabase.Str(r, "callback_state"), r.GetInt32(r.GetOrdinal("callback_attempts")),
        SqliteDatabase.Str(r, "model_sha256"), SqliteDatabase.Str(r, "profile_version"), SqliteDatabase.Str(r, "error"), SqliteDatabase.Str(r, "artifacts"));

    private static FrameRecord ReadFrame(SqliteDataReader r)
    {
        int score = r.GetOrdinal("frame_score"), rc = r.GetOrdinal("region_count");
        string? at = SqliteDatabase.Str(r, "scored_at");
        return new FrameRecord(
            r.GetString(r.GetOrdinal("batch_id")), r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")),
            r.GetString(r.GetOrdinal("source_path")), r.GetString(r.GetOrdinal("state")),
            r.IsDBNull(score) ? null : (float)r.GetDouble(score), r.IsDBNull(rc) ? null : r.GetInt32(rc),
            SqliteDatabase.Str(r, "report_path"), SqliteDatabase.Str(r, "regions_json"), SqliteDatabase.Str(r, "error"),
            at is null ? null : SqliteDatabase.ParseTime(at), r.GetInt32(r.GetOrdinal("attempts")));
    }
}
