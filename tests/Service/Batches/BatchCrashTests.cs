using System.Diagnostics;
using System.Text.Json;
using Strayspot.Service.Batches;
using Xunit.Abstractions;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Batches;

/// <summary>
/// The service as its own process, killed with SIGKILL in the middle of a batch and started again on the same data
/// folder: every frame must end up in the manifest exactly once, and frames done before the kill are not scored again.
/// </summary>
public sealed class BatchCrashTests(ITestOutputHelper output)
{
    private const int FrameCount = 12;

    private static Dictionary<string, string> Paused(TimeSpan pause) => new()
    {
        ["STRAYSPOT_Service__Batches__PauseBetweenFrames"] = pause.ToString("c"),
    };

    [Fact]
    public async Task Killed_server_resumes_the_batch_without_losing_or_rescoring_frames()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-crash-" + Guid.NewGuid().ToString("N"));
        string models = Path.Combine(root, "models"), data = Path.Combine(root, "data");
        Directory.CreateDirectory(models);
        CopyDemoModel(models);
        var names = WriteFrames(Path.Combine(data, "night"), FrameCount, debris: 3);
        try
        {
            Dictionary<string, DateTimeOffset> doneBeforeKill;
            int port = FreePort();
            // A rest between frames keeps the batch from finishing before the kill: the eight frames after the fourth take
            // at least 2 s however fast the server is, while this process (slowed by tests running beside it) polls and
            // kills. The kill lands inside a frame or inside a rest; both must resume cleanly.
            using (var first = ServiceProcess.Start(models, data, port, Paused(TimeSpan.FromMilliseconds(250))))
            {
                using var client = await first.ReadyClientAsync();
                await PostFolderAsync(client, "night", batchId: "night-1");
                await WaitAsync(client, "night-1", b => b.GetProperty("frames").GetProperty("done").GetInt32() >= 4, TimeSpan.FromSeconds(60));
                var frames = await FramesAsync(client, "night-1");
                doneBeforeKill = frames.Values.Where(f => f.GetProperty("state").GetString() == "done")
                    .ToDictionary(f => f.GetProperty("frameId").GetString()!, f => f.GetProperty("scoredAt").GetDateTimeOffset());
                first.Kill();
            }

            int doneAtKill, pendingAtKill;
            Dictionary<string, DateTimeOffset> doneInStore;
            using (var database = Strayspot.Service.Store.BatchDatabase.OpenSqlite(Path.Combine(data, ".strayspot", "batches.db")))
            {
                var store = database.Batches;
                var b = store.Get("night-1")!;
                Assert.Equal(BatchStates.Running, b.State);
                doneAtKill = b.DoneCount;
                pendingAtKill = b.PendingCount;
                doneInStore = store.Frames("night-1", FrameStates.Done).ToDictionary(f => f.FrameId, f => f.ScoredAt!.Value);
            }
            // Every done mark the client saw survived the kill.
            Assert.All(doneBeforeKill, kv => Assert.Equal(kv.Value, doneInStore[kv.Key]));
            string framesFolder = Path.Combine(data, "batches", "night-1", "frames");
            var onDisk = Directory.Exists(framesFolder) ? Directory.EnumerateDirectories(framesFolder).Select(Path.GetFileName).ToList() : [];
            output.WriteLine($"seen done before the kill: {doneBeforeKill.Count}; done in the store after the kill: {doneAtKill}; pending: {pendingAtKill}; " +
                             $"frame folders on disk: {onDisk.Count(n => !n!.StartsWith('.'))} (+{onDisk.Count(n => n!.StartsWith('.'))} temporary)");
            Assert.True(pendingAtKill > 0, "the kill came after the batch finished; nothing was tested");

            port = FreePort();
            var restart = Stopwatch.StartNew();
            using (var second = ServiceProcess.Start(models, data, port, Paused(TimeSpan.Zero)))
            {
                using var client = await second.ReadyClientAsync();
                var done = await WaitForStateAsync(client, "night-1", "done", TimeSpan.FromSeconds(60));
                output.WriteLine($"restart to done: {restart.ElapsedMilliseconds} ms");
                Assert.Equal(FrameCount, done.GetProperty("frames").GetProperty("done").GetInt32());

                var lines = await ManifestAsync(client, "night-1");
                var ids = lines.Select(l => l.GetProperty("frameId").GetString()!).ToList();
                Assert.Equal(FrameCount, ids.Count);
                Assert.Equal(names.Order(StringComparer.Ordinal), ids.Order(StringComparer.Ordinal));
                var scores = lines.Select(l => l.GetProperty("frameScore").GetSingle()).ToList();
                Assert.Equal(scores.OrderByDescending(x => x), scores);

                var after = await FramesAsync(client, "night-1");
                foreach (var (id, at) in doneInStore)
                {
                    Assert.Equal(at, after[id].GetProperty("scoredAt").GetDateTimeOffset());
                    Assert.Equal(1, after[id].GetProperty("attempts").GetInt32());
                }
                int restarted = after.Values.Count(f => f.GetProperty("attempts").GetInt32() > 1);
                output.WriteLine($"frames whose scoring started twice (in flight at the kill): {restarted}");
                Assert.InRange(restarted, 0, 1);
                string batchFolder = Path.Combine(data, "batches", "night-1");
                foreach (var line in lines)
                    Assert.True(File.Exists(Path.Combine(batchFolder, line.GetProperty("artifacts").GetProperty("report").GetString()!)));
                Assert.Empty(Directory.EnumerateDirectories(Path.Combine(batchFolder, "frames"), ".*"));
                await second.StopAsync();
            }
        }
        finally
        {
            try { Directory.Delete(root, recursive: true); } catch (IOException) { }
        }
    }
}
