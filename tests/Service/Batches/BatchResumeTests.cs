using System.Text.Json;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.TestHost;
using Strayspot.Service.Batches;
using Strayspot.Tests.Service.Api;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Batches;

public class BatchResumeTests
{
    [Fact]
    public async Task A_stopped_service_resumes_on_the_same_data_folder_and_scores_every_frame_exactly_once()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-resume-" + Guid.NewGuid().ToString("N"));
        try
        {
            Directory.CreateDirectory(Path.Combine(root, "models"));
            CopyDemoModel(Path.Combine(root, "models"));
            string data = Path.Combine(root, "data");
            var names = WriteFrames(Path.Combine(data, "run"), 8, debris: 2);

            var app = TestService.BuildOnly(root, Config(pause: TimeSpan.FromMilliseconds(250)));
            await app.StartAsync();
            using (var client = app.GetTestClient())
            {
                await PostFolderAsync(client, "run", batchId: "run-1");
                await WaitAsync(client, "run-1", b => b.GetProperty("frames").GetProperty("done").GetInt32() >= 2);
                // Graceful stop: the frame in progress finishes, the rest stays pending.
                await app.StopAsync();
            }
            await app.DisposeAsync();

            // The store opened directly, as after a crash: the batch is still running, some frames done.
            List<FrameRecord> done, pending;
            using (var database = Strayspot.Service.Store.BatchDatabase.OpenSqlite(Path.Combine(data, ".strayspot", "batches.db")))
            {
                var store = database.Batches;
                Assert.Equal(BatchStates.Running, store.Get("run-1")!.State);
                done = store.Frames("run-1", FrameStates.Done).ToList();
                pending = store.Frames("run-1", FrameStates.Pending).ToList();
            }
            Assert.InRange(done.Count, 2, 7);
            Assert.NotEmpty(pending);

            // The graceful stop finished the frame it had started: one folder per done frame, no temporary ones.
            string frames = Path.Combine(data, "batches", "run-1", "frames");
            Assert.Equal(done.Select(f => f.Seq.ToString("D5")).Order(), Directory.EnumerateDirectories(frames).Select(Path.GetFileName).Order());

            // Leave the marks of a kill in the middle of a frame: its folder renamed into place but never marked done
            // (with a stale file), and another frame's temporary folder.
            int interrupted = pending[0].Seq;
            string half = Path.Combine(frames, interrupted.ToString("D5"));
            Directory.CreateDirectory(half);
            File.WriteAllText(Path.Combine(half, "report.json"), "{ \"stale\": true }");
            File.WriteAllText(Path.Combine(half, "leftover.bin"), "x");
            Directory.CreateDirectory(Path.Combine(frames, ".00099.deadbeef.tmp"));

            await using var s2 = TestService.BuildOnly(root, Config());
            await s2.StartAsync();
            using var client2 = s2.GetTestClient();
            await WaitForStateAsync(client2, "run-1", "done");
            var after = await FramesAsync(client2, "run-1");
            var lines = await ManifestAsync(client2, "run-1");

            Assert.Equal(names.Order(StringComparer.Ordinal), lines.Select(l => l.GetProperty("frameId").GetString()!).Order(StringComparer.Ordinal));
            Assert.All(after.Values, f => Assert.Equal("done", f.GetProperty("state").GetString()));
            foreach (var f in done)
            {
                var a = after[f.FrameId];
                Assert.Equal(f.ScoredAt, a.GetProperty("scoredAt").GetDateTimeOffset());
                Assert.Equal(1, a.GetProperty("attempts").GetInt32());
            }
            var report = JsonDocument.Parse(File.ReadAllText(Path.Combine(half, "report.json"))).RootElement;
            Assert.False(report.TryGetProperty("stale", out _));
            Assert.False(File.Exists(Path.Combine(half, "leftover.bin")));
            Assert.Empty(Directory.EnumerateDirectories(frames, ".*"));
        }
        finally
        {
            try { Directory.Delete(root, recursive: true); } catch (IOException) { }
        }
    }

    [Fact]
    public void Reopened_store_keeps_done_marks_and_voids_the_claims_of_the_process_before()
    {
        string dir = Path.Combine(Path.GetTempPath(), "strayspot-store-" + Guid.NewGuid().ToString("N"));
        string db = Path.Combine(dir, "b.db");
        var lease = TimeSpan.FromHours(1);
        try
        {
            using (var database = Strayspot.Service.Store.BatchDatabase.OpenSqlite(db))
            {
                var store = database.Batches;
                store.Submit("b1", "m", "folder:x", null, [new("a.png", "x/a.png"), new("b.png", "x/b.png")]);
                store.Transition("b1", BatchStates.Running, [BatchStates.Queued]);
                var f = store.ClaimNextFrame("b1", "first", lease)!;
                Assert.True(store.CompleteFrame(f, new FrameResult(1.5f, 0, "frames/00001/report.json", "[]")));
                Assert.Equal("b.png", store.ClaimNextFrame("b1", "first", lease)!.Frame.FrameId); // held for an hour, then the process stops
            }
            using (var again = Strayspot.Service.Store.BatchDatabase.OpenSqlite(db))
            {
                var store = again.Batches;
                var b = store.Get("b1")!;
                Assert.Equal((1, 1), (b.DoneCount, b.PendingCount));
                Assert.Equal(1.5f, store.Frames("b1", FrameStates.Done).Single().FrameScore);
                // One process per file: what the last one held is free at once, not after its lease.
                var taken = store.ClaimNextFrame("b1", "second", lease)!;
                Assert.Equal(("b.png", 2), (taken.Frame.FrameId, taken.Frame.Attempts));
            }
        }
        finally
        {
            try { Directory.Delete(dir, recursive: true); } catch (IOException) { }
        }
    }

    [Fact]
    public void Regions_stored_with_the_class_name_in_classBeneath_read_back_with_the_name_beside_an_unknown_index()
    {
        const string old = """[{"id":3,"box":{"x":1,"y":2,"width":3,"height":4},"area":9,"meanScore":2,"maxScore":3,"classBeneath":"tarmac","onSurface":true,"outline":[[1,2]]}]""";
        var region = Assert.Single(Manifest.ReadRegions(old));
        Assert.Equal((3, -1, "tarmac", "tarmac"), (region.Id, region.ClassBeneath, region.ClassBeneathName, region.IndexedClass));
        var now = Assert.Single(Manifest.ReadRegions(Manifest.RegionsJson([region with { ClassBeneath = 2 }])));
        Assert.Equal((2, "tarmac"), (now.ClassBeneath, now.ClassBeneathName));
    }

    [Fact]
    public void Outline_simplification_keeps_corners_and_at_most_the_limit()
    {
        var square = new List<(int X, int Y)>();
        for (int x = 0; x < 10; x++) square.Add((x, 0));
        for (int y = 1; y < 10; y++) square.Add((9, y));
        for (int x = 8; x >= 0; x--) square.Add((x, 9));
        for (int y = 8; y >= 1; y--) square.Add((0, y));
        Assert.Equal([(0, 0), (9, 0), (9, 9), (0, 9)], Manifest.Simplify(square, 64));

        var circle = Enumerable.Range(0, 500).Select(i => ((int)Math.Round(100 * Math.Cos(i * 2 * Math.PI / 500)), (int)Math.Round(100 * Math.Sin(i * 2 * Math.PI / 500)))).ToList();
        var kept = Manifest.Simplify(circle, 64);
        Assert.True(kept.Count <= 64);
        Assert.Equal(circle[0], kept[0]);
        Assert.All(kept, p => Assert.Contains(p, circle));
    }
}

public class BatchStartupTests
{
    [Fact]
    public async Task A_batch_database_that_is_not_sqlite_stops_startup_with_the_setting_named()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-baddb-" + Guid.NewGuid().ToString("N"));
        try
        {
            Directory.CreateDirectory(Path.Combine(root, "data", ".strayspot"));
            File.WriteAllText(Path.Combine(root, "data", ".strayspot", "batches.db"), new string('x', 4096));
            var app = TestService.BuildOnly(root, BatchTestKit.Config());
            var e = await Assert.ThrowsAsync<Microsoft.Extensions.Options.OptionsValidationException>(() => app.StartAsync());
            Assert.Contains("Service:Batches:DatabasePath", e.Message);
            await app.DisposeAsync();
        }
        finally
        {
            try { Directory.Delete(root, recursive: true); } catch (IOException) { }
        }
    }
}
