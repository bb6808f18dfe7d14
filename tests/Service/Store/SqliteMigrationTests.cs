using Microsoft.Data.Sqlite;
using Strayspot.Service.Batches;
using Strayspot.Service.Reports;
using Strayspot.Service.Store;

namespace Strayspot.Tests.Service.Store;

/// <summary>A batch database written before schema versions existed opens, migrates in order, and keeps every row.</summary>
public sealed class SqliteMigrationTests : IDisposable
{
    private readonly string _folder = Path.Combine(Path.GetTempPath(), "strayspot-migrate-" + Guid.NewGuid().ToString("N"));
    private string Db => Path.Combine(_folder, "batches.db");

    /// <summary>The tables exactly as the store created them before versioning, with no region index rows.</summary>
    private const string Unversioned = """
        CREATE TABLE batches (id TEXT PRIMARY KEY, model TEXT NOT NULL, state TEXT NOT NULL, source TEXT NOT NULL, created TEXT NOT NULL,
            updated TEXT NOT NULL, frame_count INTEGER NOT NULL DEFAULT 0, done_count INTEGER NOT NULL DEFAULT 0, failed_count INTEGER NOT NULL DEFAULT 0,
            callback_url TEXT, callback_state TEXT, callback_attempts INTEGER NOT NULL DEFAULT 0, model_sha256 TEXT, profile_version TEXT, error TEXT);
        CREATE TABLE frames (batch_id TEXT NOT NULL REFERENCES batches(id), seq INTEGER NOT NULL, frame_id TEXT NOT NULL, source_path TEXT NOT NULL,
            state TEXT NOT NULL DEFAULT 'pending', frame_score REAL, region_count INTEGER, report_path TEXT, regions_json TEXT, error TEXT,
            scored_at TEXT, attempts INTEGER NOT NULL DEFAULT 0, PRIMARY KEY (batch_id, seq), UNIQUE (batch_id, frame_id));
        CREATE INDEX batches_state ON batches(state, created);
        CREATE TABLE decision_log (revision INTEGER PRIMARY KEY AUTOINCREMENT, batch_id TEXT NOT NULL REFERENCES batches(id), seq INTEGER NOT NULL,
            region INTEGER NOT NULL, verdict TEXT, note TEXT, decided_by TEXT, decided_at TEXT NOT NULL);
        CREATE INDEX decision_log_batch ON decision_log(batch_id, revision);
        CREATE TABLE decisions (batch_id TEXT NOT NULL REFERENCES batches(id), seq INTEGER NOT NULL, region INTEGER NOT NULL, verdict TEXT NOT NULL,
            note TEXT, decided_by TEXT, decided_at TEXT NOT NULL, revision INTEGER NOT NULL, PRIMARY KEY (batch_id, seq, region),
            FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
        CREATE TABLE frame_regions (batch_id TEXT NOT NULL, seq INTEGER NOT NULL, region INTEGER NOT NULL, class_beneath TEXT NOT NULL,
            max_score REAL NOT NULL, PRIMARY KEY (batch_id, seq, region), FOREIGN KEY (batch_id, seq) REFERENCES frames(batch_id, seq));
        INSERT INTO batches VALUES ('old', 'demo', 'running', 'folder:x', '2026-01-01T00:00:00Z', '2026-01-01T00:00:00Z', 2, 1, 0,
            NULL, NULL, 0, 'abc', 'v1', NULL);
        INSERT INTO frames VALUES ('old', 1, 'a.png', 'x/a.png', 'done', 3.5, 1, 'frames/00001/report.json', $regions, NULL, '2026-01-01T00:00:01Z', 1);
        INSERT INTO frames VALUES ('old', 2, 'b.png', 'x/b.png', 'pending', NULL, NULL, NULL, NULL, NULL, NULL, 1);
        INSERT INTO decision_log (batch_id, seq, region, verdict, note, decided_by, decided_at) VALUES ('old', 1, 1, 'label-it', NULL, 'ann', '2026-01-01T00:00:02Z');
        INSERT INTO decisions VALUES ('old', 1, 1, 'label-it', NULL, 'ann', '2026-01-01T00:00:02Z', 1);
        """;

    [Fact]
    public void A_database_from_before_versioning_is_migrated_in_order_and_keeps_its_rows()
    {
        Directory.CreateDirectory(_folder);
        // As stored before classBeneath became the class index: the name in its place.
        const string region = """[{"id":1,"box":{"x":0,"y":0,"width":2,"height":2},"area":4,"meanScore":3,"maxScore":3.5,"classBeneath":"apron","onSurface":false,"outline":[[0,0],[1,1]]}]""";
        using (var raw = new SqliteConnection($"Data Source={Db};Pooling=False"))
        {
            raw.Open();
            using var cmd = raw.CreateCommand();
            cmd.CommandText = Unversioned;
            cmd.Parameters.AddWithValue("$regions", region);
            cmd.ExecuteNonQuery();
        }

        using (var db = BatchDatabase.OpenSqlite(Db))
        {
            var s = db.Batches;
            Assert.Equal([(1, 1, "apron", 3.5f)], s.RegionBriefs("old").Select(b => (b.Seq, b.Region, b.ClassBeneathName, b.MaxScore)));
            Assert.Equal((2, 1, 1), (s.Get("old")!.FrameCount, s.Get("old")!.DoneCount, s.Get("old")!.PendingCount));
            var claim = s.ClaimNextFrame("old", "me", TimeSpan.FromMinutes(1))!;
            Assert.Equal(("b.png", 2), (claim.Frame.FrameId, claim.Frame.Attempts));
            Assert.True(s.CompleteFrame(claim, new FrameResult(1f, 0, "frames/00002/report.json", "[]")));
            Assert.Equal("label-it", Assert.Single(db.Decisions.Current("old")).Verdict);
            Assert.Single(db.Decisions.Log("old"));
        }
        using (var raw = new SqliteConnection($"Data Source={Db};Pooling=False"))
        {
            raw.Open();
            using var cmd = raw.CreateCommand();
            cmd.CommandText = "SELECT group_concat(version || ':' || name, '|') FROM (SELECT * FROM schema_version ORDER BY version)";
            Assert.Equal(string.Join('|', StoreSchema.Versions.Select(v => $"{v.Version}:{v.Name}")), cmd.ExecuteScalar());
            cmd.CommandText = "SELECT scored_by FROM frames WHERE seq = 2";
            Assert.Equal("me", cmd.ExecuteScalar());
        }
        // Opened again: no step runs twice (a second ALTER TABLE would throw).
        using (var again = BatchDatabase.OpenSqlite(Db)) Assert.Equal(2, again.Batches.Get("old")!.DoneCount);
    }

    [Fact]
    public void A_database_from_a_newer_build_is_refused_with_its_version()
    {
        Directory.CreateDirectory(_folder);
        BatchDatabase.OpenSqlite(Db).Dispose();
        using (var raw = new SqliteConnection($"Data Source={Db};Pooling=False"))
        {
            raw.Open();
            using var cmd = raw.CreateCommand();
            cmd.CommandText = "INSERT INTO schema_version VALUES (99, 'from the future', '2030-01-01T00:00:00Z')";
            cmd.ExecuteNonQuery();
        }
        var e = Assert.Throws<InvalidOperationException>(() => BatchDatabase.OpenSqlite(Db));
        Assert.Contains("schema version 99", e.Message);
    }

    public void Dispose()
    {
        SqliteConnection.ClearAllPools();
        try { Directory.Delete(_folder, recursive: true); } catch (IOException) { }
    }
}
