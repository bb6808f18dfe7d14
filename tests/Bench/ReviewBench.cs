using System.Diagnostics;
using System.Globalization;
using Microsoft.Data.Sqlite;
using Strayspot.Service.Batches;
using Strayspot.Service.Reports;
using Strayspot.Service.Review;

namespace Strayspot.Bench;

/// <summary>
/// What the review page costs the service on a large batch: counting decisions by class beneath from the region
/// index against reading every frame's stored regions (outlines included), and storing one decision.
/// </summary>
public static class ReviewBench
{
    private const int RegionsPerFrame = 12;
    private static readonly string[] Classes = ["pavement", "marking", "grass", "vehicle"];

    public static void Run(int runs)
    {
        Console.WriteLine();
        Console.WriteLine($"## Review: counting a batch ({RegionsPerFrame} regions per frame, 64-point outlines, one decision in 20 regions)");
        Console.WriteLine();
        Console.WriteLine("| frames | from the region index | from each frame's regions | ratio | index built on open | one decision stored |");
        Console.WriteLine("|---|---|---|---|---|---|");
        foreach (int frames in new[] { 1_000, 10_000 })
        {
            string folder = Directory.CreateTempSubdirectory("strayspot-reviewbench-").FullName;
            try
            {
                Row(Path.Combine(folder, "batches.db"), frames, runs);
            }
            finally
            {
                SqliteConnection.ClearAllPools();
                Directory.Delete(folder, recursive: true);
            }
        }
    }

    private static void Row(string db, int frames, int runs)
    {
        Seed(db, frames);
        var open = Stopwatch.StartNew();
        using var database = Strayspot.Service.Store.BatchDatabase.OpenSqlite(db); // schema step 2 builds the region index from the frames' stored regions
        var store = database.Batches;
        var decisions = database.Decisions;
        double openMs = open.Elapsed.TotalMilliseconds;
        var rng = new Random(5);
        for (int i = 0; i < frames * RegionsPerFrame / 20; i++)
            decisions.Decide("big", 1 + rng.Next(frames), 1 + rng.Next(RegionsPerFrame), i % 3 == 0 ? Verdicts.FalseAlarm : Verdicts.LabelIt, null, "bench");

        ReviewCounts? a = null, b = null;
        double indexed = Measure.MedianMs(runs, () =>
            a = ReviewTally.Count(store.FrameSummaries("big"), store.RegionBriefs("big"), decisions.Current("big")));
        double parsed = Measure.MedianMs(runs, () =>
        {
            var all = store.Frames("big");
            var briefs = new List<RegionBrief>();
            foreach (var f in all)
                foreach (var r in Manifest.ReadRegions(f.RegionsJson)) briefs.Add(new RegionBrief(f.Seq, r.Id, r.IndexedClass, r.MaxScore));
            b = ReviewTally.Count(all.Select(f => new FrameSummary(f.Seq, f.FrameId, f.State, f.FrameScore, f.RegionCount)).ToList(), briefs, decisions.Current("big"));
        });
        if (a!.Regions != b!.Regions) throw new InvalidOperationException("the two ways of counting disagree");
        int k = 0;
        double decide = Measure.MedianMs(runs, () => decisions.Decide("big", 1 + (k++ % frames), 1, Verdicts.Unsure, "bench", "bench"));
        var inv = CultureInfo.InvariantCulture;
        Console.WriteLine(string.Create(inv, $"| {frames} | {indexed:F1} ms | {parsed:F1} ms | {parsed / indexed:F1}× | {openMs:F0} ms | {decide:F2} ms |"));
    }

    /// <summary>A done batch written straight into the tables (one transaction, no fsync per frame), without its index.</summary>
    private static void Seed(string db, int frames)
    {
        Strayspot.Service.Store.BatchDatabase.OpenSqlite(db).Dispose(); // the schema
        using var c = new SqliteConnection($"Data Source={db};Pooling=False");
        c.Open();
        using (var back = c.CreateCommand())
        {
            // Back to schema version 1, as a file from before the region index: the next open runs the steps that fill it.
            back.CommandText = "DELETE FROM schema_version WHERE version > 1; DROP INDEX frames_open; ALTER TABLE frames DROP COLUMN lease_owner; " +
                               "ALTER TABLE frames DROP COLUMN lease_until; ALTER TABLE frames DROP COLUMN scored_by; " +
                               "ALTER TABLE batches DROP COLUMN callback_owner; ALTER TABLE batches DROP COLUMN callback_until;";
            back.ExecuteNonQuery();
        }
        using var tx = c.BeginTransaction();
        using (var b = c.CreateCommand())
        {
            b.Transaction = tx;
            b.CommandText = "INSERT INTO batches (id, model, state, source, created, updated, frame_count, done_count) " +
                            "VALUES ('big', 'm', 'done', 'folder:x', '2026-01-01T00:00:00Z', '2026-01-01T00:00:00Z', $n, $n)";
            b.Parameters.AddWithValue("$n", frames);
            b.ExecuteNonQuery();
        }
        using var cmd = c.CreateCommand();
        cmd.Transaction = tx;
        cmd.CommandText = "INSERT INTO frames (batch_id, seq, frame_id, source_path, state, frame_score, region_count, report_path, regions_json, scored_at, attempts) " +
                          "VALUES ('big', $seq, $f, $f, 'done', $s, $rc, $rp, $rj, '2026-01-01T00:00:00Z', 1)";
        var seq = cmd.Parameters.Add("$seq", SqliteType.Integer);
        var f = cmd.Parameters.Add("$f", SqliteType.Text);
        var s = cmd.Parameters.Add("$s", SqliteType.Real);
        var rc = cmd.Parameters.Add("$rc", SqliteType.Integer);
        var rp = cmd.Parameters.Add("$rp", SqliteType.Text);
        var rj = cmd.Parameters.Add("$rj", SqliteType.Text);
        var rng = new Random(3);
        for (int i = 1; i <= frames; i++)
        {
            var regions = new List<ManifestRegion>(RegionsPerFrame);
            for (int r = 1; r <= RegionsPerFrame; r++)
            {
                var outline = new int[64][];
                for (int p = 0; p < 64; p++) outline[p] = [rng.Next(1920), rng.Next(1080)];
                float max = 2.5f + (float)rng.NextDouble() * 2;
                regions.Add(new ManifestRegion(r, new BoxReport(rng.Next(1800), rng.Next(1000), 40, 30), 900, max - 0.5f, max,
                    0, Classes[rng.Next(Classes.Length)], true, outline));
            }
            seq.Value = i;
            f.Value = $"cam/{i:D6}.png";
            s.Value = 2.5 + rng.NextDouble() * 2;
            rc.Value = RegionsPerFrame;
            rp.Value = $"frames/{i:D5}/report.json";
            rj.Value = Manifest.RegionsJson(regions);
            cmd.ExecuteNonQuery();
        }
        tx.Commit();
    }
}
