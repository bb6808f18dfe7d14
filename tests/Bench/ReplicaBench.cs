using System.Diagnostics;
using System.Globalization;
using Npgsql;
using Strayspot.Service.Batches;
using Strayspot.Service.Demo;
using Strayspot.Service.Store;
using Strayspot.Tests.Support;

namespace Strayspot.Bench;

/// <summary>
/// Batch work split between worker processes (<c>strayspot work --until-idle</c>) on one PostgreSQL cluster (started
/// here as the tests start it): frames/s with 1, 2 and 3 workers, and what the store costs per frame — time in the
/// store calls, round-trips (transactions counted by the server), rows updated and lease renewals.
/// </summary>
public static class ReplicaBench
{
    private const int Frames = 90;
    private const int Width = 512, Height = 256;

    public static void Run(int runs)
    {
        if (PostgresCluster.SkipReason is { } why)
        {
            Console.WriteLine($"replicas: skipped: {why}");
            return;
        }
        string root = Directory.CreateTempSubdirectory("strayspot-bench-rep-").FullName;
        try
        {
            using var cluster = new PostgresCluster();
            string models = Path.Combine(root, "models"), data = Path.Combine(root, "data");
            BundledDemo.Extract(Path.Combine(models, "demo"), Path.Combine(root, "demo-frames"));
            Directory.CreateDirectory(Path.Combine(data, "frames"));
            var gen = new ApronSceneGenerator(Width, Height);
            var names = new List<string>();
            for (int i = 0; i < Frames; i++)
            {
                string name = $"f{i:D3}.png";
                File.WriteAllBytes(Path.Combine(data, "frames", name), DemoPng.Encode(gen.Render(100 + i)));
                names.Add(name);
            }

            Console.WriteLine();
            Console.WriteLine($"## Batch work split by leases on one PostgreSQL ({Frames} frames of {Width}×{Height}, demo model, 1 inference thread per worker)");
            Console.WriteLine();
            Console.WriteLine("| workers | frames/s | × one worker | transactions per frame | frame rows updated per frame | lease renewals per frame |");
            Console.WriteLine("|---|---|---|---|---|---|");
            double one = 0;
            foreach (int workers in new[] { 1, 2, 3 })
            {
                var r = RunWorkers(cluster, models, data, names, workers);
                if (workers == 1) one = r.FramesPerSecond;
                Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                    $"| {workers} | {r.FramesPerSecond:F1} | {r.FramesPerSecond / one:F2}× | {r.TransactionsPerFrame:F1} | {r.UpdatesPerFrame:F2} | {r.RenewalsPerFrame:F2} |"));
            }

            Console.WriteLine();
            Console.WriteLine($"## Store cost per frame in process (claim + done mark with 3 regions; median of {runs} runs of 200 frames)");
            Console.WriteLine();
            Console.WriteLine("| engine | per frame | claim | done mark |");
            Console.WriteLine("|---|---|---|---|");
            StoreCost("sqlite (synchronous=FULL)", () => BatchDatabase.OpenSqlite(Path.Combine(root, $"cost-{Guid.NewGuid():N}.db")), runs);
            StoreCost("postgres (loopback, fsync off)", () => BatchDatabase.OpenPostgres(cluster.CreateDatabase()), runs);
        }
        finally
        {
            try { Directory.Delete(root, recursive: true); } catch (IOException) { }
        }
    }

    private sealed record WorkerRun(double FramesPerSecond, double TransactionsPerFrame, double UpdatesPerFrame, double RenewalsPerFrame);

    private static WorkerRun RunWorkers(PostgresCluster cluster, string models, string data, List<string> names, int workers)
    {
        string connection = cluster.CreateDatabase();
        string batch = $"bench-{workers}";
        using (var store = BatchDatabase.OpenPostgres(connection))
            store.Batches.Submit(batch, "demo", "folder:frames", null, names.Select(n => new NewFrame(n, "frames/" + n)).ToList());
        var before = Counters(connection);
        var procs = new List<Process>();
        for (int i = 0; i < workers; i++)
        {
            var info = new ProcessStartInfo("dotnet") { UseShellExecute = false, RedirectStandardOutput = true, RedirectStandardError = true };
            foreach (string a in new[] { Path.Combine(AppContext.BaseDirectory, "strayspot.dll"), "work", "--until-idle", "--models", models, "--data", data,
                         "--urls", $"http://127.0.0.1:{FreePort()}" })
                info.ArgumentList.Add(a);
            info.Environment["STRAYSPOT_Service__Store"] = "postgres";
            info.Environment["STRAYSPOT_Service__StoreConnection"] = connection;
            info.Environment["STRAYSPOT_Service__IntraOpThreads"] = "1";
            info.Environment["STRAYSPOT_Service__MaxConcurrentFrames"] = "1";
            info.Environment["STRAYSPOT_Service__Batches__PollInterval"] = "00:00:00.500";
            var p = Process.Start(info)!;
            p.OutputDataReceived += (_, _) => { };
            p.ErrorDataReceived += (_, _) => { };
            p.BeginOutputReadLine();
            p.BeginErrorReadLine();
            procs.Add(p);
        }
        foreach (var p in procs)
        {
            if (!p.WaitForExit(TimeSpan.FromMinutes(5))) p.Kill(true);
            p.Dispose();
        }
        Thread.Sleep(1500); // the server publishes a finished session's counters shortly after it ends
        var after = Counters(connection);
        using var c = new NpgsqlConnection(connection);
        c.Open();
        using var cmd = new NpgsqlCommand("SELECT count(*), extract(epoch FROM max(scored_at) - min(scored_at)) FROM frames WHERE batch_id = @b AND state = 'done'", c);
        cmd.Parameters.AddWithValue("b", batch);
        using var r = cmd.ExecuteReader();
        r.Read();
        long done = r.GetInt64(0);
        double span = Convert.ToDouble(r.GetValue(1), CultureInfo.InvariantCulture);
        if (done != names.Count) throw new InvalidOperationException($"{done} of {names.Count} frames done with {workers} workers");
        double updates = (after.FrameUpdates - before.FrameUpdates) / (double)done;
        // Each frame is claimed once and marked done once; any other update of its row is a renewal.
        return new WorkerRun((done - 1) / span, (after.Transactions - before.Transactions) / (double)done, updates, updates - 2);
    }

    private static (long Transactions, long FrameUpdates) Counters(string connection)
    {
        using var c = new NpgsqlConnection(connection);
        c.Open();
        using var cmd = new NpgsqlCommand("SELECT (SELECT xact_commit + xact_rollback FROM pg_stat_database WHERE datname = current_database()), " +
                                          "(SELECT COALESCE(n_tup_upd, 0) FROM pg_stat_user_tables WHERE relname = 'frames')", c);
        using var r = cmd.ExecuteReader();
        r.Read();
        return (r.GetInt64(0), r.IsDBNull(1) ? 0 : r.GetInt64(1));
    }

    private static void StoreCost(string label, Func<BatchDatabase> open, int runs)
    {
        const int n = 200;
        string regions = Manifest.RegionsJson(Enumerable.Range(1, 3).Select(i =>
            new ManifestRegion(i, new Strayspot.Service.Reports.BoxReport(i, i, 10, 10), 80, 2f, 3f, 0, "apron", true, [[i, i], [i + 9, i], [i + 9, i + 9]])).ToList());
        var perFrame = new List<double>();
        var claims = new List<double>();
        var marks = new List<double>();
        for (int run = 0; run < runs; run++)
        {
            using var db = open();
            var s = db.Batches;
            string id = "cost" + run;
            s.Submit(id, "m", "folder:x", null, Enumerable.Range(0, n).Select(i => new NewFrame($"{i}.png", $"x/{i}.png")).ToList());
            s.Transition(id, BatchStates.Running, [BatchStates.Queued]);
            double claim = 0, mark = 0;
            var clock = Stopwatch.StartNew();
            while (true)
            {
                long t0 = Stopwatch.GetTimestamp();
                var f = s.ClaimNextFrame(id, "bench", TimeSpan.FromSeconds(30));
                long t1 = Stopwatch.GetTimestamp();
                if (f is null) break;
                s.CompleteFrame(f, new FrameResult(3f, 3, "r", regions));
                claim += Stopwatch.GetElapsedTime(t0, t1).TotalMilliseconds;
                mark += Stopwatch.GetElapsedTime(t1).TotalMilliseconds;
            }
            perFrame.Add(clock.Elapsed.TotalMilliseconds / n);
            claims.Add(claim / n);
            marks.Add(mark / n);
        }
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"| {label} | {Measure.Median(perFrame):F2} ms | {Measure.Median(claims):F2} ms | {Measure.Median(marks):F2} ms |"));
    }

    private static int FreePort()
    {
        var l = new System.Net.Sockets.TcpListener(System.Net.IPAddress.Loopback, 0);
        l.Start();
        int port = ((System.Net.IPEndPoint)l.LocalEndpoint).Port;
        l.Stop();
        return port;
    }
}
