using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Hosting;

public class FrameGateTests
{
    [Fact]
    public async Task One_slot_one_waiter_then_refusal_and_the_waiter_gets_the_freed_slot()
    {
        using var gate = new FrameGate(slots: 1, maxQueued: 1);
        var first = await gate.TryEnterAsync(CancellationToken.None);
        Assert.NotNull(first);

        var second = gate.TryEnterAsync(CancellationToken.None).AsTask();
        Assert.False(second.IsCompleted);
        Assert.Equal(1, gate.Queued);

        Assert.Null(await gate.TryEnterAsync(CancellationToken.None)); // queue full: refused at once
        Assert.Equal(1, gate.Queued);

        first!.Dispose();
        var lease = await second.WaitAsync(TimeSpan.FromSeconds(10));
        Assert.NotNull(lease);
        Assert.Equal(0, gate.Queued);
        Assert.Equal(1, gate.Busy);
        lease!.Dispose();
        lease.Dispose(); // a second dispose must not free a second slot
        Assert.Equal(0, gate.Busy);
    }

    [Fact]
    public async Task A_cancelled_waiter_leaves_the_queue()
    {
        using var gate = new FrameGate(slots: 1, maxQueued: 1);
        using var held = await gate.TryEnterAsync(CancellationToken.None);
        using var cts = new CancellationTokenSource();
        var waiting = gate.TryEnterAsync(cts.Token).AsTask();
        cts.Cancel();
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => waiting);
        Assert.Equal(0, gate.Queued);
        // The place is free again.
        var again = gate.TryEnterAsync(CancellationToken.None).AsTask();
        Assert.Equal(1, gate.Queued);
        held!.Dispose();
        (await again)!.Dispose();
    }

    [Fact]
    public async Task Many_callers_never_exceed_slots_plus_queue()
    {
        using var gate = new FrameGate(slots: 2, maxQueued: 3);
        int inside = 0, maxInside = 0, refused = 0;
        var release = new TaskCompletionSource();
        var tasks = Enumerable.Range(0, 20).Select(_ => Task.Run(async () =>
        {
            var lease = await gate.TryEnterAsync(CancellationToken.None);
            if (lease is null) { Interlocked.Increment(ref refused); return; }
            int now = Interlocked.Increment(ref inside);
            InterlockedMax(ref maxInside, now);
            await release.Task;
            Interlocked.Decrement(ref inside);
            lease.Dispose();
        })).ToList();
        await WaitUntil(() => Volatile.Read(ref refused) == 15);
        release.SetResult();
        await Task.WhenAll(tasks);
        Assert.Equal(15, refused);
        Assert.True(maxInside <= 2, $"{maxInside} frames were inside a gate of 2");
        Assert.InRange(gate.RetryAfterSeconds(), 1, 60);
    }

    private static void InterlockedMax(ref int target, int value)
    {
        int seen;
        while ((seen = Volatile.Read(ref target)) < value && Interlocked.CompareExchange(ref target, value, seen) != seen) { }
    }

    private static async Task WaitUntil(Func<bool> condition)
    {
        var until = DateTime.UtcNow.AddSeconds(10);
        while (!condition() && DateTime.UtcNow < until) await Task.Delay(10);
        Assert.True(condition());
    }
}
