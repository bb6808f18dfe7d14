using Microsoft.Extensions.Options;

namespace Strayspot.Service.Hosting;

/// <summary>Too many frames are already waiting; the client should retry after <see cref="RetryAfterSeconds"/>.</summary>
public sealed class QueueFullException(int retryAfterSeconds, string message) : Exception(message)
{
    public int RetryAfterSeconds { get; } = retryAfterSeconds;
}

/// <summary>
/// Runs one frame's CPU work through the <see cref="FrameGate"/> within the request budget: a full queue fails at
/// once with <see cref="QueueFullException"/>; waiting or working past Service:RequestTimeout fails with
/// <see cref="FrameTimeoutException"/>. A client that hangs up just cancels.
/// </summary>
public sealed class ScoringLane(FrameGate gate, IOptions<ServiceOptions> options)
{
    public TimeSpan Budget => options.Value.RequestTimeout;

    public async Task<T> RunAsync<T>(Func<CancellationToken, T> work, CancellationToken requestAborted)
    {
        using var deadline = CancellationTokenSource.CreateLinkedTokenSource(requestAborted);
        deadline.CancelAfter(Budget);
        FrameGate.Lease? lease;
        try
        {
            lease = await gate.TryEnterAsync(deadline.Token);
        }
        catch (OperationCanceledException) when (!requestAborted.IsCancellationRequested)
        {
            throw new FrameTimeoutException(
                $"No scoring slot came free within {Budget.TotalSeconds:0.#} s (Service:RequestTimeout); {gate.Slots} frame(s) are scored at once.");
        }
        if (lease is null)
        {
            int retry = gate.RetryAfterSeconds();
            throw new QueueFullException(retry,
                $"{gate.Slots} frame(s) are being scored and {gate.Queued} are waiting, the most the service queues " +
                $"(Service:MaxQueuedFrames); retry in about {retry} s.");
        }
        using (lease)
        {
            try
            {
                deadline.Token.ThrowIfCancellationRequested();
                // The work is CPU-bound; run it off the request's thread so a long frame does not hold the server's I/O threads.
                return await Task.Run(() => work(deadline.Token), deadline.Token);
            }
            catch (OperationCanceledException) when (!requestAborted.IsCancellationRequested)
            {
                throw new FrameTimeoutException($"The frame was not scored within {Budget.TotalSeconds:0.#} s (Service:RequestTimeout).");
            }
        }
    }
}
