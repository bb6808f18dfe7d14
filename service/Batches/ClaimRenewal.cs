using Strayspot.Service.Store;

namespace Strayspot.Service.Batches;

/// <summary>
/// Renews a frame claim every third of the lease while the frame is scored, so a slow frame is not taken over;
/// notes when the claim was lost. A store that cannot be reached is tried again at the next tick.
/// </summary>
public sealed class ClaimRenewal : IDisposable
{
    private readonly CancellationTokenSource _stop = new();
    private readonly Task _loop;
    private volatile bool _lost;

    public ClaimRenewal(IBatchStore store, FrameClaim claim, TimeSpan lease, ILogger log)
    {
        _loop = Task.Run(async () =>
        {
            using var timer = new PeriodicTimer(lease / 3);
            try
            {
                while (await timer.WaitForNextTickAsync(_stop.Token))
                {
                    try
                    {
                        if (!store.RenewClaim(claim, lease)) { _lost = true; return; }
                    }
                    catch (StoreUnavailableException e)
                    {
                        log.LogWarning("Claim on batch {BatchId} frame {Seq} not renewed: {Reason}", claim.BatchId, claim.Seq, e.Message);
                    }
                }
            }
            catch (OperationCanceledException) { }
        });
    }

    /// <summary>The claim expired and someone else holds the frame, or it was finished elsewhere.</summary>
    public bool Lost => _lost;

    public void Dispose()
    {
        _stop.Cancel();
        try { _loop.Wait(); } catch (AggregateException) { }
        _stop.Dispose();
    }
}
