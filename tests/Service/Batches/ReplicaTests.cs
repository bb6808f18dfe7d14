using System.Net;
using System.Net.Http.Json;
using System.Text.Json;
using Npgsql;
using Strayspot.Tests.Support;
using Xunit.Abstractions;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Batches;

/// <summary>
/// Several service processes on one real PostgreSQL and one shared data folder, as a cluster runs them: frames are
/// split by leased claims, a replica killed with SIGKILL loses its frames to the others once its lease runs out,
/// the database restarting under them loses nothing, and decisions written through one are read through another.
/// Leases are short here (1.5 s) so takeovers take seconds. The serving replicas are started once for the class and
/// shared by its tests (each on its own batch): starting a process and loading its model is most of the cost; a
/// replica a test kills is replaced.
/// </summary>
[Collection(PostgresCollection.Name)]
public sealed class ReplicaTests(PostgresFixture postgres, ReplicaTests.SharedFleet shared, ITestOutputHelper output) : IClassFixture<ReplicaTests.SharedFleet>
{
    private const int Small = 96; // frame width; height is half: the split is under test, not the scoring

    [PostgresFact]
    public async Task Three_replicas_split_one_batch_and_score_every_frame_exactly_once()
    {
        var fleet = shared.Of(postgres.Cluster);
        var names = WriteFrames(Path.Combine(fleet.Data, "yard"), 60, debris: 6, width: Small, height: Small / 2);
        var clock = System.Diagnostics.Stopwatch.StartNew();
        var replicas = await fleet.LiveAsync(3);
        output.WriteLine($"three replicas ready in {clock.ElapsedMilliseconds} ms");
        using var a = replicas[0].Client();
        using var c = replicas[2].Client();
        clock.Restart();
        await PostFolderAsync(a, "yard", batchId: "yard-1");
        await WaitForStateAsync(c, "yard-1", "done", TimeSpan.FromSeconds(60));
        output.WriteLine($"60 frames done in {clock.ElapsedMilliseconds} ms");

        var byOwner = fleet.ScoredBy("yard-1");
        output.WriteLine("frames scored per replica: " + string.Join(", ", byOwner.Select(kv => $"{kv.Key}={kv.Value}")));
        foreach (var r in replicas)
            Assert.True(byOwner.Keys.Any(o => o.Contains($"/{r.Id}/", StringComparison.Ordinal)), $"replica {r.Id} scored no frame");
        Assert.Equal(60, byOwner.Values.Sum());
        await AssertEveryFrameOnceAsync(c, "yard-1", names, fleet);
        Assert.All((await FramesAsync(c, "yard-1")).Values, f => Assert.Equal(1, f.GetProperty("attempts").GetInt32()));
    }

    [PostgresFact]
    public async Task A_killed_replicas_frames_are_taken_over_after_its_lease_and_none_is_lost_or_doubled()
    {
        var fleet = shared.Of(postgres.Cluster);
        for (int round = 1; round <= 3; round++)
        {
            string folder = $"round{round}", id = $"kill-{round}";
            var names = WriteFrames(Path.Combine(fleet.Data, folder), 16, seed: round, width: Small, height: Small / 2);
            var live = await fleet.LiveAsync(3);
            using var poster = live[0].Client();
            // Every artifact, as batches wrote before the lean default: frames long enough to catch a replica holding one.
            await PostFolderAsync(poster, folder, batchId: id, artifacts: "all");
            // No wait for the first frames here: on an idle machine the three replicas finish 16 small frames within
            // a poll or two, and the search below only succeeds while a replica holds a claim anyway.

            // The victim: a replica holding a claim right now (the others keep scoring). It is frozen before its claims
            // are read, so it cannot finish the frame between the read and the kill.
            ServiceProcess? victim = null;
            List<int> held = [];
            for (int tries = 0; victim is null && tries < 2000; tries++)
            {
                foreach (var r in live)
                {
                    if (fleet.Held(id, r.Id).Count == 0) continue;
                    r.Signal(freeze: true);
                    held = fleet.Held(id, r.Id);
                    if (held.Count > 0) { victim = r; break; }
                    r.Signal(freeze: false);
                }
                if (victim is null) await Task.Delay(2);
            }
            Assert.True(victim is not null, "no replica held a claim; nothing was tested");
            victim.Kill();
            Assert.NotEmpty(held);
            output.WriteLine($"round {round}: killed replica {victim.Id} holding frame(s) {string.Join(", ", held)}");
            // Any replica may be the victim, the one the batch was posted to included: follow it through a survivor.
            using var client = live.First(r => r != victim).Client();
            fleet.Start(); // as an orchestrator would; the other two finish meanwhile

            await WaitForStateAsync(client, id, "done", TimeSpan.FromSeconds(60));
            await AssertEveryFrameOnceAsync(client, id, names, fleet);
            var frames = (await FramesAsync(client, id)).Values.ToDictionary(f => f.GetProperty("seq").GetInt32());
            foreach (int seq in held)
            {
                // Taken over: scored again by another replica after the lease ran out (its first attempt died with the victim).
                Assert.Equal("done", frames[seq].GetProperty("state").GetString());
                Assert.Equal(2, frames[seq].GetProperty("attempts").GetInt32());
                Assert.DoesNotContain($"/{victim.Id}/", fleet.ScorerOf(id, seq));
            }
        }
    }

    [PostgresFact]
    public async Task A_database_restart_mid_batch_makes_replicas_not_ready_and_loses_nothing()
    {
        var fleet = shared.Of(postgres.Cluster);
        var names = WriteFrames(Path.Combine(fleet.Data, "night"), 30, width: Small, height: Small / 2);
        var replicas = await fleet.LiveAsync(3);
        using var a = replicas[0].Client();
        await PostFolderAsync(a, "night", batchId: "night-1");
        await WaitAsync(a, "night-1", b => b.GetProperty("frames").GetProperty("done").GetInt32() >= 5, TimeSpan.FromSeconds(60));

        postgres.Cluster.Stop();
        try
        {
            HttpStatusCode status = HttpStatusCode.OK;
            string body = "";
            for (int i = 0; i < 100 && status == HttpStatusCode.OK; i++)
            {
                await Task.Delay(100);
                var r = await a.GetAsync("/readyz");
                (status, body) = (r.StatusCode, await r.Content.ReadAsStringAsync());
            }
            output.WriteLine($"readiness while the database is down: {(int)status} {body}");
            Assert.Equal(HttpStatusCode.ServiceUnavailable, status);
            Assert.Contains("cannot be reached", body);
            var asked = await a.GetAsync("/v1/batches/night-1");
            Assert.Equal(HttpStatusCode.ServiceUnavailable, asked.StatusCode); // a clear "try again", not a 500
            Assert.Contains("not-ready", await asked.Content.ReadAsStringAsync());
            await Task.Delay(1000); // replicas back off meanwhile
        }
        finally
        {
            postgres.Cluster.Start();
        }
        await WaitForStateAsync(a, "night-1", "done", TimeSpan.FromSeconds(60));
        Assert.True((await a.GetAsync("/readyz")).IsSuccessStatusCode);
        await AssertEveryFrameOnceAsync(a, "night-1", names, fleet);
        Assert.All(replicas, r => Assert.False(r.HasExited, r.Log));
    }

    [PostgresFact]
    public async Task Decisions_and_jobs_written_through_one_replica_are_read_through_another_and_logged_once()
    {
        var fleet = shared.Of(postgres.Cluster);
        WriteFrames(Path.Combine(fleet.Data, "gate"), 3, debris: 3, width: Small, height: Small / 2);
        Strayspot.Tests.Service.Evaluation.EvaluationFixtures.WriteFlatDataset(Path.Combine(fleet.Data, "held-out"), 2);
        var replicas = await fleet.LiveAsync(2);
        using var a = replicas[0].Client();
        using var b = replicas[1].Client();
        await PostFolderAsync(a, "gate", batchId: "gate-1");
        await WaitForStateAsync(b, "gate-1", "done", TimeSpan.FromSeconds(60));

        string[] verdicts = ["unsure", "label-it", "false-alarm", "label-it", "unsure", "false-alarm"];
        var writes = verdicts.Select((v, i) => (i % 2 == 0 ? a : b).PutAsJsonAsync("/v1/batches/gate-1/frames/1/decision",
            new { verdict = v, note = $"write {i}", reviewer = i % 2 == 0 ? "via-a" : "via-b" })).ToList();
        foreach (var r in await Task.WhenAll(writes)) Assert.True(r.IsSuccessStatusCode, await r.Content.ReadAsStringAsync());

        var log = (await GetAsync(a, "/v1/batches/gate-1/decisions/log")).GetProperty("entries").EnumerateArray().ToList();
        Assert.Equal(verdicts.Length, log.Count);
        Assert.Equal(Enumerable.Range(0, verdicts.Length).Select(i => $"write {i}").Order(), log.Select(e => e.GetProperty("note").GetString()!).Order());
        var current = Assert.Single((await GetAsync(b, "/v1/batches/gate-1/decisions")).GetProperty("decisions").EnumerateArray());
        // The latest write in the log is the current decision, whichever replica took it.
        Assert.Equal(log[^1].GetProperty("revision").GetInt64(), current.GetProperty("revision").GetInt64());
        Assert.Equal(log[^1].GetProperty("note").GetString(), current.GetProperty("note").GetString());

        // Calibration and evaluation jobs started through A are listed, followed and activated through B.
        // On a second copy of the model, installed now (every replica picks it up from the shared folder): activating
        // changes the model's calibration, which the other tests' batches must not see.
        string staged = Path.Combine(fleet.Data, "..", "staged-model");
        CopyDemoModel(staged, Fleet.JobsModel);
        Directory.Move(Path.Combine(staged, Fleet.JobsModel), Path.Combine(fleet.Models, Fleet.JobsModel)); // appears whole
        foreach (var replica in new[] { a, b })
            for (var until = DateTime.UtcNow.AddSeconds(30); !await UsableAsync(replica, Fleet.JobsModel) && DateTime.UtcNow < until;)
                await Task.Delay(100);
        var calibration = await a.PostAsJsonAsync($"/v1/models/{Fleet.JobsModel}/calibrations", new { folder = "gate" });
        Assert.Equal(HttpStatusCode.Accepted, calibration.StatusCode);
        string calibrationId = (await calibration.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("id").GetString()!;
        var evaluation = await a.PostAsJsonAsync($"/v1/models/{Fleet.JobsModel}/evaluations", new { dataset = "held-out" });
        Assert.Equal(HttpStatusCode.Accepted, evaluation.StatusCode);
        string evaluationId = (await evaluation.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("id").GetString()!;
        Assert.Contains(calibrationId, (await GetAsync(b, "/v1/calibrations")).EnumerateArray().Select(j => j.GetProperty("id").GetString()));
        Assert.Contains(evaluationId, (await GetAsync(b, "/v1/evaluations")).EnumerateArray().Select(j => j.GetProperty("id").GetString()));
        var calibrated = await WaitForJobAsync(b, $"/v1/calibrations/{calibrationId}");
        Assert.Equal("done", calibrated.GetProperty("state").GetString());
        Assert.Equal(3, calibrated.GetProperty("framesDone").GetInt32());
        Assert.Equal("done", (await WaitForJobAsync(b, $"/v1/evaluations/{evaluationId}")).GetProperty("state").GetString());
        Assert.True((await b.GetAsync($"/v1/evaluations/{evaluationId}/files/metrics.json")).IsSuccessStatusCode);
        var activated = await b.PostAsync($"/v1/calibrations/{calibrationId}/activate", null);
        Assert.True(activated.IsSuccessStatusCode, await activated.Content.ReadAsStringAsync());
        Assert.Equal("activated", (await GetAsync(a, $"/v1/calibrations/{calibrationId}")).GetProperty("state").GetString());
        // The activated calibration reaches the replica that did not activate it (it sees the shared models folder change).
        long? measuredOver = null;
        for (var until = DateTime.UtcNow.AddSeconds(30); measuredOver != 3 && DateTime.UtcNow < until; await Task.Delay(100))
            measuredOver = (await GetAsync(a, $"/v1/models/{Fleet.JobsModel}")).GetProperty("calibration").GetProperty("frameCount").GetInt64();
        Assert.Equal(3, measuredOver);
        // One record per job, in the one store.
        Assert.Equal([("calibration", calibrationId, "activated"), ("evaluation", evaluationId, "done")], fleet.Jobs());
    }

    private static async Task<bool> UsableAsync(HttpClient client, string model)
    {
        var r = await client.GetAsync($"/v1/models/{model}");
        return r.IsSuccessStatusCode && (await r.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("usable").GetBoolean();
    }

    private static async Task<JsonElement> WaitForJobAsync(HttpClient client, string path)
    {
        var until = DateTime.UtcNow.AddSeconds(60);
        while (true)
        {
            var job = await GetAsync(client, path);
            if (job.GetProperty("state").GetString() is "done" or "failed" || DateTime.UtcNow > until) return job;
            await Task.Delay(100);
        }
    }

    [PostgresFact]
    public async Task A_worker_takes_only_batch_work_and_exits_when_none_is_left()
    {
        using var fleet = new Fleet(postgres.Cluster); // its own store: the shared serving replicas would take its batch
        var names = WriteFrames(Path.Combine(fleet.Data, "late"), 8, width: Small, height: Small / 2);
        // Queued straight into the store, as the service does on POST /v1/batches (sources relative to the data folder).
        using (var store = Strayspot.Service.Store.BatchDatabase.OpenPostgres(fleet.Connection))
            store.Batches.Submit("late-1", Model, "folder:late", null, names.Select(n => new Strayspot.Service.Batches.NewFrame(n, "late/" + n)).ToList());

        // Side by side, on a store with no work: a worker without --until-idle serves health but no scoring API, and stays up until stopped.
        var clock = System.Diagnostics.Stopwatch.StartNew();
        using var empty = new Fleet(postgres.Cluster);
        using var idle = empty.Start(verb: "work");
        var worker = fleet.Start(verb: "work", args: ["--until-idle"]);
        using (var client = await idle.ReadyClientAsync())
        {
            Assert.Equal(HttpStatusCode.NotFound, (await client.GetAsync("/v1/models")).StatusCode); // no scoring API on a worker
            output.WriteLine($"idle worker ready in {clock.ElapsedMilliseconds} ms");
            await idle.StopAsync();
            output.WriteLine($"idle worker stopped at {clock.ElapsedMilliseconds} ms");
        }

        await worker.WaitForExitAsync(TimeSpan.FromSeconds(90));
        output.WriteLine($"worker done at {clock.ElapsedMilliseconds} ms");
        Assert.True(worker.ExitCode == 0, worker.Log);

        using (var store = Strayspot.Service.Store.BatchDatabase.OpenPostgres(fleet.Connection))
            Assert.Equal(("done", 8), (store.Batches.Get("late-1")!.State, store.Batches.Get("late-1")!.DoneCount));
        Assert.All(fleet.ScoredBy("late-1").Keys, o => Assert.Contains($"/{worker.Id}/", o));
        var manifest = File.ReadAllLines(Path.Combine(fleet.Data, "batches", "late-1", "manifest.jsonl"));
        Assert.Equal(names.Order(StringComparer.Ordinal),
            manifest.Select(l => JsonDocument.Parse(l).RootElement.GetProperty("frameId").GetString()!).Order(StringComparer.Ordinal));
    }

    private static async Task AssertEveryFrameOnceAsync(HttpClient client, string id, List<string> names, Fleet fleet)
    {
        var lines = await ManifestAsync(client, id);
        Assert.Equal(names.Order(StringComparer.Ordinal), lines.Select(l => l.GetProperty("frameId").GetString()!).Order(StringComparer.Ordinal));
        string frames = Path.Combine(fleet.Data, "batches", id, "frames");
        foreach (var line in lines)
            Assert.True(File.Exists(Path.Combine(fleet.Data, "batches", id, line.GetProperty("artifacts").GetProperty("report").GetString()!)));
        Assert.Equal(names.Count, Directory.EnumerateDirectories(frames).Count(d => !Path.GetFileName(d).StartsWith('.')));
    }

    /// <summary>The class's serving replicas on one database, started on first use and stopped after the class.</summary>
    public sealed class SharedFleet : IDisposable
    {
        private Fleet? _fleet;

        public Fleet Of(PostgresCluster cluster) => _fleet ??= new Fleet(cluster);

        public void Dispose() => _fleet?.Dispose();
    }

    /// <summary>Replicas on one database and one data folder (the demo model, copied once).</summary>
    public sealed class Fleet : IDisposable
    {
        private readonly string _root = Path.Combine(Path.GetTempPath(), "strayspot-fleet-" + Guid.NewGuid().ToString("N"));
        private readonly List<ServiceProcess> _started = [];
        private readonly string _connection;

        public const string JobsModel = "demo-jobs";

        public Fleet(PostgresCluster cluster)
        {
            Directory.CreateDirectory(Models);
            CopyDemoModel(Models);
            _connection = cluster.CreateDatabase();
        }

        public string Models => Path.Combine(_root, "models");
        public string Data => Path.Combine(_root, "data");

        public string Connection => _connection;

        public ServiceProcess Start(string verb = "serve", string[]? args = null)
        {
            var p = ServiceProcess.Start(Models, Data, FreePort(), new Dictionary<string, string>
            {
                ["STRAYSPOT_Service__Store"] = "postgres",
                ["STRAYSPOT_Service__StoreConnection"] = _connection,
                ["STRAYSPOT_Service__Batches__LeaseTime"] = "00:00:01.500",
                ["STRAYSPOT_Service__MaxConcurrentFrames"] = "1",
            }, verb, args ?? []);
            _started.Add(p);
            return p;
        }

        /// <summary>
        /// <paramref name="n"/> serving replicas that are alive and ready, oldest first: those started so far (replacements
        /// of killed ones included), and new ones started side by side when there are fewer.
        /// </summary>
        public async Task<List<ServiceProcess>> LiveAsync(int n)
        {
            var live = _started.Where(p => p.Verb == "serve" && !p.HasExited).ToList();
            for (int i = live.Count; i < n; i++) live.Add(Start());
            live = live.Take(n).ToList();
            await Task.WhenAll(live.Select(async p => (await p.ReadyClientAsync()).Dispose()));
            return live;
        }

        /// <summary>Frames of the batch scored by each claim owner (host/process/random).</summary>
        public Dictionary<string, int> ScoredBy(string batch) => Query(
            "SELECT scored_by, count(*) FROM frames WHERE batch_id = @b AND state = 'done' GROUP BY scored_by", r => (r.GetString(0), (int)r.GetInt64(1)),
            ("b", batch)).ToDictionary();

        public string ScorerOf(string batch, int seq) =>
            Query("SELECT scored_by FROM frames WHERE batch_id = @b AND seq = @s", r => r.GetString(0), ("b", batch), ("s", seq)).Single();

        /// <summary>Every stored job: kind and state, by kind.</summary>
        public List<(string, string, string)> Jobs() => Query("SELECT kind, id, state FROM jobs ORDER BY kind, id", r => (r.GetString(0), r.GetString(1), r.GetString(2)));

        /// <summary>The frames process <paramref name="pid"/> holds a claim on now.</summary>
        public List<int> Held(string batch, int pid) => Query(
            "SELECT seq FROM frames WHERE batch_id = @b AND state = 'pending' AND lease_owner LIKE @o", r => r.GetInt32(0),
            ("b", batch), ("o", $"%/{pid}/%"));

        private List<T> Query<T>(string sql, Func<NpgsqlDataReader, T> row, params (string, object)[] args)
        {
            using var c = new NpgsqlConnection(_connection);
            c.Open();
            using var cmd = new NpgsqlCommand(sql, c);
            foreach (var (n, v) in args) cmd.Parameters.AddWithValue(n, v);
            using var r = cmd.ExecuteReader();
            var list = new List<T>();
            while (r.Read()) list.Add(row(r));
            return list;
        }

        public void Dispose()
        {
            foreach (var p in _started) p.Dispose();
            try { Directory.Delete(_root, recursive: true); } catch (IOException) { }
        }
    }
}
