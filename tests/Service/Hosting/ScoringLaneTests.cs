using Microsoft.Extensions.Options;
using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Hosting;

public class ScoringLaneTests
{
    private static (ScoringLane Lane, FrameGate Gate) Make(int slots, int queue, TimeSpan timeout)
    {
        var options = Options.Create(new ServiceOptions { MaxConcurrentFrames = slots, MaxQueuedFrames = queue, RequestTimeout = timeout });
        var gate = new FrameGate(options);
        return (new ScoringLane(gate, options), gate);
    }

    [Fact]
    public async Task Full_queue_fails_at_once_with_a_retry_hint()
    {
        var (lane, gate) = Make(1, 0, TimeSpan.FromSeconds(30));
        using var _ = gate;
        var release = new ManualResetEventSlim();
        var running = lane.RunAsync(_ => { release.Wait(); return 1; }, CancellationToken.None);
        while (gate.Busy == 0) await Task.Delay(5);
        var e = await Assert.ThrowsAsync<QueueFullException>(() => lane.RunAsync(_ => 2, CancellationToken.None));
        Assert.InRange(e.RetryAfterSeconds, 1, 60);
        Assert.Contains("MaxQueuedFrames", e.Message);
        release.Set();
        Assert.Equal(1, await running);
        Assert.Equal(2, await lane.RunAsync(_ => 2, CancellationToken.None)); // free again
    }

    [Fact]
    public async Task Waiting_past_the_budget_is_a_timeout()
    {
        var (lane, gate) = Make(1, 4, TimeSpan.FromMilliseconds(200));
        using var _ = gate;
        using var held = await gate.TryEnterAsync(CancellationToken.None);
        var e = await Assert.ThrowsAsync<FrameTimeoutException>(() => lane.RunAsync(_ => 1, CancellationToken.None));
        Assert.Contains("RequestTimeout", e.Message);
        Assert.Equal(0, gate.Queued);
    }

    [Fact]
    public async Task Work_that_overruns_and_checks_its_token_is_a_timeout_and_frees_the_slot()
    {
        var (lane, gate) = Make(1, 0, TimeSpan.FromMilliseconds(200));
        using var _ = gate;
        await Assert.ThrowsAsync<FrameTimeoutException>(() => lane.RunAsync(ct =>
        {
            ct.WaitHandle.WaitOne(TimeSpan.FromSeconds(20));
            ct.ThrowIfCancellationRequested();
            return 1;
        }, CancellationToken.None));
        Assert.Equal(0, gate.Busy);
    }

    [Fact]
    public async Task A_client_hanging_up_is_a_cancellation_not_a_timeout()
    {
        var (lane, gate) = Make(1, 1, TimeSpan.FromSeconds(30));
        using var _ = gate;
        using var held = await gate.TryEnterAsync(CancellationToken.None);
        using var client = new CancellationTokenSource();
        var waiting = lane.RunAsync(_ => 1, client.Token);
        client.Cancel();
        var e = await Assert.ThrowsAnyAsync<OperationCanceledException>(() => waiting);
        Assert.IsNotType<FrameTimeoutException>(e);
    }
}
