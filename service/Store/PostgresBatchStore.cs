using Npgsql;
using Strayspot.Service.Batches;

namespace Strayspot.Service.Store;

/// <summary>
/// Batches and frames in PostgreSQL, shared by replicas. A claim takes the first pending frame nobody holds with
/// <c>FOR UPDATE SKIP LOCKED</c> (replicas never wait on each other's rows) and stamps it with the owner and an
/// expiry on the server's clock; the done mark, the batch count and the region index are one statement, written
/// only while the owner still holds the claim. Each is one round-trip.
/// </summary>
public sealed class PostgresBatchStore(PostgresDatabase db) : IBatchStore
{
    public bool Shared => true;

    public (BatchRecord Batch, bool Created, int Added) Submit(string id, string model, string source, string? callbackUrl,
        IReadOnlyList<NewFrame> frames, string? artifacts = null) => db.InTransaction((c, tx) =>
    {
        var now = db.Now();
        bool created = PostgresDatabase.Exec(c, tx,
            "INSERT INTO batches (id, model, state, source, created, updated, callback_url, artifacts) VALUES (@id, @m, @state, @s, @now, @now, @cb, @a) " +
            "ON CONFLICT (id) DO NOTHING",
            ("id", id), ("m", model), ("state", BatchStates.Queued), ("s", source), ("now", now), ("cb", callbackUrl), ("a", artifacts)) == 1;
        // The batch row is the lock that orders concurrent submits to one batch.
        PostgresDatabase.Exec(c, tx, "SELECT 1 FROM batches WHERE id = @id FOR UPDATE", ("id", id));
        var ids = new string[frames.Count];
        var paths = new string[frames.Count];
        for (int i = 0; i < frames.Count; i++) (ids[i], paths[i]) = (frames[i].FrameId, frames[i].SourcePath);
        int added = PostgresDatabase.Exec(c, tx, """
            INSERT INTO frames (batch_id, seq, frame_id, source_path, state)
            SELECT @id, (SELECT COALESCE(MAX(seq), 0) FROM frames WHERE batch_id = @id) + row_number() OVER (ORDER BY o), f, p, @state
            FROM (SELECT DISTINCT ON (f) f, p, o FROM unnest(@ids, @paths) WITH ORDINALITY AS x(f, p, o) ORDER BY f, o) firsts
            WHERE NOT EXISTS (SELECT 1 FROM frames e WHERE e.batch_id = @id AND e.frame_id = firsts.f)
            """, ("id", id), ("ids", ids), ("paths", paths), ("state", FrameStates.Pending));
        if (added > 0)
        {
            PostgresDatabase.Exec(c, tx, "UPDATE batches SET frame_count = frame_count + @n, updated = @now, " +
                                         "callback_state = CASE WHEN state = @done THEN NULL ELSE callback_state END, " +
                                         "state = CASE WHEN state = @done THEN @queued ELSE state END WHERE id = @id",
                ("n", added), ("now", now), ("id", id), ("done", BatchStates.Done), ("queued", BatchStates.Queued));
        }
        return (GetOn(c, tx, id)!, created, added);
    });

    public BatchRecord? Get(string id) => db.Run(c => GetOn(c, null, id));

    public IReadOnlyList<BatchRecord> List(int limit = 100, string? state = null) => db.Run(c => PostgresDatabase.Query(c, null,
        "SELECT * FROM batches WHERE (@state::text IS NULL OR state = @state) ORDER BY created DESC, id LIMIT @limit", ReadBatch,
        ("state", state), ("limit", limit)));

    public IReadOnlyList<BatchRecord> Runnable() => db.Run(c => PostgresDatabase.Query(c, null,
        "SELECT * FROM batches WHERE state = ANY(@states) ORDER BY state = @queued, created, id", ReadBatch,
        ("states", new[] { BatchStates.Queued, BatchStates.Running }), ("queued", BatchStates.Queued)));

    public IReadOnlyList<BatchRecord> CallbacksDue() => db.Run(c => PostgresDatabase.Query(c, null,
        "SELECT * FROM batches WHERE callback_state = @pending ORDER BY updated", ReadBatch, ("pending", CallbackStates.Pending)));

    public bool Transition(string id, string to, IReadOnlyList<string> from, string? error = null, string? modelSha256 = null,
        string? profileVersion = null) => db.Run(c => PostgresDatabase.Exec(c, null,
        "UPDATE batches SET state = @to, updated = @now, error = COALESCE(@err, error), " +
        "model_sha256 = COALESCE(@sha, model_sha256), profile_version = COALESCE(@pv, profile_version), " +
        "callback_state = CASE WHEN @finished AND callback_url IS NOT NULL THEN @cbPending WHEN @finished THEN NULL ELSE callback_state END " +
        "WHERE id = @id AND state = ANY(@from)",
        ("to", to), ("now", db.Now()), ("err", error), ("sha", modelSha256), ("pv", profileVersion),
        ("finished", BatchStates.IsFinished(to)), ("cbPending", CallbackStates.Pending), ("id", id), ("from", from.ToArray())) == 1);

    public bool FinishIfComplete(string id) => db.Run(c => PostgresDatabase.Exec(c, null,
        "UPDATE batches SET state = @done, updated = @now, callback_state = CASE WHEN callback_url IS NULL THEN NULL ELSE @cbPending END " +
        "WHERE id = @id AND state = @running AND NOT EXISTS (SELECT 1 FROM frames WHERE batch_id = @id AND state = @pending)",
        ("done", BatchStates.Done), ("now", db.Now()), ("cbPending", CallbackStates.Pending), ("id", id),
        ("running", BatchStates.Running), ("pending", FrameStates.Pending)) == 1);

    public IReadOnlyList<FrameRecord> Frames(string batchId, string? state = null) => db.Run(c => PostgresDatabase.Query(c, null,
        "SELECT * FROM frames WHERE batch_id = @id AND (@state::text IS NULL OR state = @state) ORDER BY seq", ReadFrame,
        ("id", batchId), ("state", state)));

    public IReadOnlyList<FrameSummary> FrameSummaries(string batchId) => db.Run(c => PostgresDatabase.Query(c, null,
        "SELECT seq, frame_id, state, frame_score, region_count FROM frames WHERE batch_id = @id ORDER BY seq",
        r => new FrameSummary(r.GetInt32(0), r.GetString(1), r.GetString(2), r.IsDBNull(3) ? null : (float)r.GetDouble(3),
            r.IsDBNull(4) ? null : r.GetInt32(4)),
        ("id", batchId)));

    public FrameRecord? Frame(string batchId, int seq) => db.Run(c => PostgresDatabase.Query(c, null,
        "SELECT * FROM frames WHERE batch_id = @id AND seq = @seq", ReadFrame, ("id", batchId), ("seq", seq)).FirstOrDefault());

    public FrameClaim? ClaimNextFrame(string batchId, string owner, TimeSpan lease)
    {
        var frame = db.Run(c => PostgresDatabase.Query(c, null, """
            UPDATE frames f SET attempts = f.attempts + 1, lease_owner = @owner, lease_until = now() + @lease
            FROM (SELECT o.batch_id, o.seq FROM frames o JOIN batches b ON b.id = o.batch_id
                  WHERE o.batch_id = @id AND b.state = @running AND o.state = @pending AND (o.lease_until IS NULL OR o.lease_until < now())
                  ORDER BY o.seq LIMIT 1 FOR UPDATE OF o SKIP LOCKED) pick
            WHERE f.batch_id = pick.batch_id AND f.seq = pick.seq
            RETURNING f.*
            """, ReadFrame, ("owner", owner), ("lease", lease), ("id", batchId), ("running", BatchStates.Running),
            ("pending", FrameStates.Pending)).FirstOrDefault());
        return frame is null ? null : new FrameClaim(frame, owner);
    }

    public bool RenewClaim(FrameClaim claim, TimeSpan lease) => db.Run(c => PostgresDatabase.Exec(c, null,
        "UPDATE frames SET lease_until = now() + @lease WHERE batch_id = @id AND seq = @seq AND state = @pending AND lease_owner = @owner",
        ("lease", lease), ("id", claim.BatchId), ("seq", claim.Seq), ("pending", FrameStates.Pending), ("owner", claim.Owner)) == 1);

    public bool CompleteFrame(FrameClaim claim, FrameResult result)
    {
        var regions = Manifest.ReadRegions(result.RegionsJson);
        var numbers = new int[regions.Count];
        var classes = new string[regions.Count];
        var scores = new double[regions.Count];
        for (int i = 0; i < regions.Count; i++)
            (numbers[i], classes[i], scores[i]) = (regions[i].Id, regions[i].IndexedClass, RegionIndex.FiniteScore(regions[i].MaxScore));
        return db.Run(c => Convert.ToInt64(PostgresDatabase.Scalar(c, null, """
            WITH f AS (UPDATE frames SET state = @doneF, frame_score = @score, region_count = @rc, report_path = @rp, regions_json = @rj,
                           error = NULL, scored_at = @now, scored_by = lease_owner, lease_owner = NULL, lease_until = NULL
                       WHERE batch_id = @id AND seq = @seq AND state = @pending AND lease_owner = @owner RETURNING batch_id, seq),
                 b AS (UPDATE batches SET done_count = done_count + 1, updated = @now WHERE id = @id AND EXISTS (SELECT 1 FROM f)),
                 r AS (INSERT INTO frame_regions (batch_id, seq, region, class_beneath, max_score)
                       SELECT f.batch_id, f.seq, x.n, x.c, x.s FROM f, unnest(@numbers, @classes, @scores) AS x(n, c, s)
                       ON CONFLICT (batch_id, seq, region) DO UPDATE SET class_beneath = EXCLUDED.class_beneath, max_score = EXCLUDED.max_score)
            SELECT count(*) FROM f
            """, ("doneF", FrameStates.Done), ("score", (double)result.FrameScore), ("rc", result.RegionCount), ("rp", result.ReportPath),
            ("rj", result.RegionsJson), ("now", db.Now()), ("id", claim.BatchId), ("seq", claim.Seq), ("pending", FrameStates.Pending),
            ("owner", claim.Owner), ("numbers", numbers), ("classes", classes), ("scores", scores)),
            System.Globalization.CultureInfo.InvariantCulture) == 1);
    }

    public bool FailFrame(FrameClaim claim, string error) => db.Run(c => Convert.ToInt64(PostgresDatabase.Scalar(c, null, """
        WITH f AS (UPDATE frames SET state = @failed, error = @err, scored_at = @now, scored_by = lease_owner, lease_owner = NULL, lease_until = NULL
                   WHERE batch_id = @id AND seq = @seq AND state = @pending AND lease_owner = @owner RETURNING 1),
             b AS (UPDATE batches SET failed_count = failed_count + 1, updated = @now WHERE id = @id AND EXISTS (SELECT 1 FROM f))
        SELECT count(*) FROM f
        """, ("failed", FrameStates.Failed), ("err", error), ("now", db.Now()), ("id", claim.BatchId), ("seq", claim.Seq),
        ("pending", FrameStates.Pending), ("owner", claim.Owner)), System.Globalization.CultureInfo.InvariantCulture) == 1);

    public void RecordCallback(string id, string state, int attempts) => db.Run(c => PostgresDatabase.Exec(c, null,
        "UPDATE batches SET callback_state = @s, callback_attempts = @a WHERE id = @id", ("s", state), ("a", attempts), ("id", id)));

    public bool ClaimCallback(string id, string owner, TimeSpan lease) => db.Run(c => PostgresDatabase.Exec(c, null,
        "UPDATE batches SET callback_owner = @o, callback_until = now() + @lease WHERE id = @id AND callback_state = @pending " +
        "AND (callback_owner IS NULL OR callback_owner = @o OR callback_until < now())",
        ("o", owner), ("lease", lease), ("id", id), ("pending", CallbackStates.Pending)) == 1);

    public IReadOnlyList<RegionBrief> RegionBriefs(string batchId) => db.Run(c => PostgresDatabase.Query(c, null,
        "SELECT seq, region, class_beneath, max_score FROM frame_regions WHERE batch_id = @id ORDER BY seq, region",
        r => new RegionBrief(r.GetInt32(0), r.GetInt32(1), r.GetString(2), (float)r.GetDouble(3)), ("id", batchId)));

    public void Ping() => db.Run(c => PostgresDatabase.Scalar(c, null, "SELECT 1"));

    private static BatchRecord? GetOn(NpgsqlConnection c, NpgsqlTransaction? tx, string id) =>
        PostgresDatabase.Query(c, tx, "SELECT * FROM batches WHERE id = @id", ReadBatch, ("id", id)).FirstOrDefault();

    private static BatchRecord ReadBatch(NpgsqlDataReader r) => new(
        r.GetString(r.GetOrdinal("id")), r.GetString(r.GetOrdinal("model")), r.GetString(r.GetOrdinal("state")),
        r.GetString(r.GetOrdinal("source")), PostgresDatabase.Time(r, "created"), PostgresDatabase.Time(r, "updated"),
        r.GetInt32(r.GetOrdinal("frame_count")), r.GetInt32(r.GetOrdinal("done_count")), r.GetInt32(r.GetOrdinal("failed_count")),
        PostgresDatabase.Str(r, "callback_url"), PostgresDatabase.Str(r, "callback_state"), r.GetInt32(r.GetOrdinal("callback_attempts")),
        PostgresDatabase.Str(r, "model_sha256"), PostgresDatabase.Str(r, "profile_version"), PostgresDatabase.Str(r, "error"), PostgresDatabase.Str(r, "artifacts"));

    private static FrameRecord ReadFrame(NpgsqlDataReader r)
    {
        int score = r.GetOrdinal("frame_score"), rc = r.GetOrdinal("region_count"), at = r.GetOrdinal("scored_at");
        return new FrameRecord(
            r.GetString(r.GetOrdinal("batch_id")), r.GetInt32(r.GetOrdinal("seq")), r.GetString(r.GetOrdinal("frame_id")),
            r.GetString(r.GetOrdinal("source_path")), r.GetString(r.GetOrdinal("state")),
            r.IsDBNull(score) ? null : (float)r.GetDouble(score), r.IsDBNull(rc) ? null : r.GetInt32(rc),
            PostgresDatabase.Str(r, "report_path"), PostgresDatabase.Str(r, "regions_json"), PostgresDatabase.Str(r, "error"),
            r.IsDBNull(at) ? null : r.GetFieldValue<DateTimeOffset>(at), r.GetInt32(r.GetOrdinal("attempts")));
    }
}
