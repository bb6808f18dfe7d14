using Strayspot.Service.Store;

namespace Strayspot.Service.Batches;

/// <summary>
/// Renews a claim (a frame's, or a calibration or evaluation job's) every third of the lease while its work runs, so
/// slow work is not taken over; notes when the claim was lost. A store that cannot be reached is tried again at the
/// next tick.
/// </summary>
public sealed class ClaimRenewal : IDisposable
{
    private readonly CancellationTokenSource _stop = new();
    private readonly Task _loop;
    private volatile bool _lost;

    public ClaimRenewal(IBatchStore store, FrameClaim claim, TimeSpan lease, ILogger log)
        : this(() => store.RenewClaim(claim, lease), lease, $"batch {claim.BatchId} frame {claim.Seq}", log)
    {
    }

    /// <param name="renew">Pushes the expiry on; false when the claim was lost.</param>
    /// <param name="what">What is held, for the log.</param>
    public ClaimRenewal(Func<bool> renew, TimeSpan lease, string what, ILogger log)
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
                        if (!renew()) { _lost = true; return; }
                    }
                    catch (StoreUnavailableException e)
                    {
                        log.LogWarning("Claim on {Held} not renewed: {Reason}", what, e.Message);
                    }
                }
            }
            catch (OperationCanceledException) { }
        });
    }

    /// <summary>The claim expired and someone else holds the work, or it was finished elsewhere.</summary>
    public bool Lost => _lost;

    public void Dispose()
    {
        _stop.Cancel();
        try { _loop.Wait(); } catch (AggregateException) { }
        _stop.Dispose();
    }
}
