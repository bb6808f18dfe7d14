using System.Collections.Concurrent;
using SixLabors.ImageSharp;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Inference;

public class ModelRegistryTests
{
    private static readonly ParallelSettings OneThread = new() { IntraOpThreads = 1, WarmUp = false };

    private static void WriteProfile(string folder, float threshold) =>
        File.WriteAllText(Path.Combine(folder, "profile.json"),
            $$"""{ "version": "t{{threshold}}", "options": { "method": "maxlogit", "threshold": {{threshold}} } }""");

    [Fact]
    public void Versions_replaced_under_traffic_never_dispose_a_session_in_use_and_leave_one_session_per_model()
    {
        using var dir = new TempFolder();
        string folder = Path.Combine(dir.Path, "cam");
        new TestSegmentationGraph { Classes = 3, Stride = 2 }.WriteFolder(folder);
        WriteProfile(folder, 0.5f);
        string modelPath = Path.Combine(folder, SegmentationModel.ModelFileName);
        using var registry = new ModelRegistry(OneThread);
        var runner = new FrameRunner();
        var current = ModelVersion.Read(folder);
        registry.Load(current);
        Assert.Equal(1, SegmentationModel.LiveSessions(modelPath));

        using var image = TestImages.Noise(24, 16, seed: 3);
        using var png = new MemoryStream();
        image.SaveAsPng(png);
        var decoder = new FrameDecoder();
        var failures = new ConcurrentBag<Exception>();
        int scored = 0;
        using var stop = new CancellationTokenSource();
        var traffic = Enumerable.Range(0, 3).Select(_ => Task.Run(() =>
        {
            while (!stop.IsCancellationRequested)
            {
                try
                {
                    // Null: this thread's version was replaced and its weights are gone (the caller retries).
                    using var lease = registry.Borrow(Volatile.Read(ref current));
                    if (lease is null) continue;
                    using var frame = decoder.Decode(png.ToArray());
                    runner.Score(lease, frame, null, (s, _) => s.FrameScore);
                    Interlocked.Increment(ref scored);
                }
                catch (Exception e) { failures.Add(e); }
            }
        })).ToArray();

        // Profile changes keep the session; new weights replace it while frames are in flight.
        // The traffic must be running before the first replacement: on a loaded machine its tasks may start late.
        SpinWait.SpinUntil(() => Volatile.Read(ref scored) > 0 || !failures.IsEmpty, TimeSpan.FromSeconds(20));
        for (int i = 0; i < 6; i++)
        {
            Thread.Sleep(40);
            if (i % 2 == 0) WriteProfile(folder, 0.5f + i);
            else new TestSegmentationGraph { Classes = 3, Stride = 2 + i % 4 / 2 * 2 }.WriteFolder(folder);
            var next = ModelVersion.Read(folder);
            registry.Load(next);
            Volatile.Write(ref current, next);
        }
        Thread.Sleep(40);
        stop.Cancel();
        Task.WaitAll(traffic);

        Assert.Empty(failures);
        Assert.True(scored > 0);
        Assert.Equal(1, registry.LiveSessions("cam"));
        Assert.Equal(1, SegmentationModel.LiveSessions(modelPath));
        registry.Dispose();
        Assert.Equal(0, SegmentationModel.LiveSessions(modelPath));
    }

    [Fact]
    public void A_profile_or_statistics_change_keeps_the_session_and_a_descriptor_change_gets_fresh_preprocessors()
    {
        using var dir = new TempFolder();
        string folder = Path.Combine(dir.Path, "cam");
        var graph = new TestSegmentationGraph { Classes = 3, Stride = 2 };
        graph.WriteFolder(folder);
        using var registry = new ModelRegistry(OneThread);
        var first = ModelVersion.Read(folder);
        using (var lease = registry.Borrow(first)!) Assert.NotNull(lease.Session);
        WriteProfile(folder, 3f);
        var second = ModelVersion.Read(folder);
        Assert.NotEqual(first.Key, second.Key);
        Assert.Equal(first.SessionKey, second.SessionKey);
        SegmentationModel session;
        using (var lease = registry.Borrow(second, SessionUse.IfLoaded)!) session = lease.Session;
        Assert.Equal(1, registry.LiveSessions("cam"));

        // Only the descriptor's normalization changes: a new version, a new session and preprocessors built from it.
        var original = graph.Descriptor();
        var changed = original with { Input = original.Input with { Mean = [0.5f, 0.5f, 0.5f] } };
        changed.Save(Path.Combine(folder, ModelDescriptor.FileName));
        var third = ModelVersion.Read(folder);
        Assert.NotEqual(second.SessionKey, third.SessionKey);
        Assert.Null(registry.Borrow(third, SessionUse.IfLoaded));
        using var fresh = registry.Borrow(third)!;
        Assert.NotSame(session, fresh.Session);
        Assert.Equal([0.5f, 0.5f, 0.5f], fresh.Version.Descriptor.Input.Mean);
        Assert.Equal(1, registry.LiveSessions("cam"));
    }
}
