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
        Timelines(runs);
        ManifestWarnings(runs);
    }

    /// <summary>
    /// What repeating each frame's warnings costs the manifest: report.json is read for its warnings field on every
    /// frame line. A done batch of 12-region frames (one report in ten warns), the whole manifest against the reads alone.
    /// </summary>
    private static void ManifestWarnings(int runs)
    {
        Console.WriteLine();
        Console.WriteLine("## Review: manifest lines with their reports' warnings (12 regions a frame, one report in ten warns)");
        Console.WriteLine();
        Console.WriteLine("| frames | whole manifest | of which reading warnings from report.json | share | report.json size |");
        Console.WriteLine("|---|---|---|---|---|");
        var inv = CultureInfo.InvariantCulture;
        foreach (int frames in new[] { 1_000, 10_000 })
        {
            string folder = Directory.CreateTempSubdirectory("strayspot-reviewbench-").FullName;
            try
            {
                string db = Path.Combine(folder, "batches.db");
                Seed(db, frames);
                using var database = Strayspot.Service.Store.BatchDatabase.OpenSqlite(db);
                string batchFolder = Path.Combine(folder, "big");
                var rng = new Random(11);
                long size = 0;
                for (int i = 1; i <= frames; i++)
                {
                    var regions = Enumerable.Range(1, RegionsPerFrame).Select(r => new RegionReport
                    {
                        Id = r, Box = new BoxReport(rng.Next(1800), rng.Next(1000), 40, 30), Area = 900, AreaShare = 0.0004, Centroid = [rng.Next(1920), rng.Next(1080)],
                        MaxScore = 3 + (float)rng.NextDouble(), MeanScore = 2.5f, ClassBeneath = 0, ClassBeneathName = "pavement", ClassBeneathShare = 0.9, OnSurface = true,
                    }).ToList();
                    var report = new FrameReport
                    {
                        FrameId = $"cam/{i:D6}.png", Regions = regions, TimingsMs = new() { ["total"] = 40 },
                        Warnings = i % 10 == 0 ? [new ReportWarning(ScoringWarnings.FrameSizeDiffers, "The frame is 1920×1080, but the calibration was measured on 1024×512 frames.")] : [],
                    };
                    string path = Path.Combine(batchFolder, "frames", $"{i:D5}", "report.json");
                    Directory.CreateDirectory(Path.GetDirectoryName(path)!);
                    File.WriteAllText(path, System.Text.Json.JsonSerializer.Serialize(report, FrameReport.JsonOptions));
                    size += new FileInfo(path).Length;
                }
                var batch = database.Batches.Get("big")!;
                var all = database.Batches.Frames("big");
                var decisions = database.Decisions.Current("big");
                int warned = 0;
                double whole = Measure.MedianMs(runs, () => Manifest.WriteTo(Stream.Null, Manifest.Lines(batchFolder, batch, all, decisions)));
                double reads = Measure.MedianMs(runs, () =>
                {
                    warned = 0;
                    foreach (var f in all) if (Manifest.WarningsOf(Path.Combine(batchFolder, f.ReportPath!)) is not null) warned++;
                });
                if (warned != frames / 10) throw new InvalidOperationException($"read {warned} warned reports, wrote {frames / 10}");
                Console.WriteLine(string.Create(inv, $"| {frames} | {whole:F0} ms | {reads:F0} ms | {reads / whole:P0} | {size / frames / 1024.0:F1} KB |"));
            }
            finally
            {
                SqliteConnection.ClearAllPools();
                Directory.Delete(folder, recursive: true);
            }
        }
    }

    /// <summary>
    /// The recording route reads the recording's frames.jsonl line by line for the timeline strip (times and frame
    /// scores, merged into at most 2000 points). Synthetic lines shaped like the real ones: three regions each, with
    /// their outlines and tracks. The light reader (what the route uses) against parsing every line whole (what it did).
    /// </summary>
    private static void Timelines(int runs)
    {
        Console.WriteLine();
        Console.WriteLine("## Review: a recording's timeline strip (frames.jsonl read for times and scores, three regions a line with 32-point outlines)");
        Console.WriteLine();
        Console.WriteLine("| sampled frames | file | each line parsed whole | light reader | ratio | points sent |");
        Console.WriteLine("|---|---|---|---|---|---|");
        var inv = CultureInfo.InvariantCulture;
        foreach (int frames in new[] { 2_000, 40_000 })
        {
            string path = Path.Combine(Path.GetTempPath(), $"strayspot-timeline-{Guid.NewGuid():N}.jsonl");
            try
            {
                var rng = new Random(9);
                using (var w = new StreamWriter(path))
                {
                    for (int i = 0; i < frames; i++)
                    {
                        var regions = string.Join(",", Enumerable.Range(1, 3).Select(r => string.Create(inv,
                            $"{{\"id\":{r},\"box\":{{\"x\":{rng.Next(1800)},\"y\":{rng.Next(1000)},\"width\":40,\"height\":30}},\"area\":900," +
                            $"\"meanScore\":{2 + rng.NextDouble():F4},\"maxScore\":{3 + rng.NextDouble():F4},\"classBeneath\":0,\"classBeneathName\":\"pavement\",\"onSurface\":true," +
                            $"\"outline\":[{string.Join(",", Enumerable.Range(0, 32).Select(_ => $"[{rng.Next(1920)},{rng.Next(1080)}]"))}],\"track\":{i + r}}}")));
                        w.WriteLine(string.Create(inv, $"{{\"frameId\":\"drive.mp4@{i:D6}\",\"index\":{i},\"timeSeconds\":{i / 10.0:F3},\"frameScore\":{2 + 2 * rng.NextDouble():F4}," +
                            $"\"anomalousShare\":0.001,\"regions\":[{regions}]}}"));
                    }
                }
                int points = 0, whole = 0;
                // Alternated within each run so both see the same moment of a noisy machine.
                var wholeMs = new List<double>();
                var lightMs = new List<double>();
                for (int r = -2; r < runs; r++) // two warm-up rounds
                {
                    long t = Stopwatch.GetTimestamp();
                    whole = WholeLines(path);
                    double a = Stopwatch.GetElapsedTime(t).TotalMilliseconds;
                    t = Stopwatch.GetTimestamp();
                    points = BatchReview.Timeline(path).Times.Count;
                    double b = Stopwatch.GetElapsedTime(t).TotalMilliseconds;
                    if (r < 0) continue;
                    wholeMs.Add(a);
                    lightMs.Add(b);
                }
                if (whole != frames) throw new InvalidOperationException("the whole-line parse lost lines");
                double w0 = Measure.Median(wholeMs), l0 = Measure.Median(lightMs);
                Console.WriteLine(string.Create(inv, $"| {frames} | {new FileInfo(path).Length / 1e6:F1} MB | {w0:F1} ms | {l0:F1} ms | {w0 / l0:F1}× | {points} |"));
            }
            finally
            {
                File.Delete(path);
            }
        }
    }

    /// <summary>The strip's reading before the light reader: every line decoded to text and parsed into a document.</summary>
    private static int WholeLines(string path)
    {
        var times = new List<double>();
        var scores = new List<float?>();
        foreach (string line in File.ReadLines(path))
        {
            if (line.Length == 0) continue;
            using var doc = System.Text.Json.JsonDocument.Parse(line);
            var root = doc.RootElement;
            times.Add(root.GetProperty("timeSeconds").GetDouble());
            scores.Add(root.TryGetProperty("frameScore", out var f) && f.ValueKind == System.Text.Json.JsonValueKind.Number ? f.GetSingle() : null);
        }
        return times.Count;
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
                               "ALTER TABLE batches DROP COLUMN callback_owner; ALTER TABLE batches DROP COLUMN callback_until; " +
                               "DROP TABLE jobs; ALTER TABLE decision_log DROP COLUMN track; DROP TABLE track_decisions; ALTER TABLE batches DROP COLUMN artifacts;";
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
