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
            using (var store = new BatchStore(Path.Combine(data, ".strayspot", "batches.db")))
            {
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
    public void Store_marks_a_frame_done_once_and_keeps_frame_ids_unique_per_batch()
    {
        string dir = Path.Combine(Path.GetTempPath(), "strayspot-store-" + Guid.NewGuid().ToString("N"));
        string db = Path.Combine(dir, "b.db");
        try
        {
            using (var store = new BatchStore(db))
            {
                var (batch, created, added) = store.Submit("b1", "m", "folder:x", null, [new("a.png", "x/a.png"), new("b.png", "x/b.png"), new("a.png", "x/a2.png")]);
                Assert.True(created);
                Assert.Equal(2, added);
                Assert.Equal(2, batch.FrameCount);
                var f = store.StartNextFrame("b1")!;
                Assert.Equal("a.png", f.FrameId);
                Assert.True(store.CompleteFrame("b1", f.Seq, new FrameResult(1.5f, 0, "frames/00001/report.json", "[]")));
                Assert.False(store.CompleteFrame("b1", f.Seq, new FrameResult(9f, 0, "frames/00001/report.json", "[]")));
            }
            using (var again = new BatchStore(db))
            {
                var b = again.Get("b1")!;
                Assert.Equal(1, b.DoneCount);
                Assert.Equal(1, b.PendingCount);
                Assert.Equal(1.5f, again.Frames("b1", FrameStates.Done).Single().FrameScore);
                Assert.Equal("b.png", again.StartNextFrame("b1")!.FrameId);
                var (_, created, added) = again.Submit("b1", "m", "folder:x", null, [new("a.png", "x/a.png"), new("c.png", "x/c.png")]);
                Assert.False(created);
                Assert.Equal(1, added);
                Assert.Equal(3, again.Get("b1")!.FrameCount);
            }
        }
        finally
        {
            try { Directory.Delete(dir, recursive: true); } catch (IOException) { }
        }
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
