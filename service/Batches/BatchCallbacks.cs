using System.Net.Http.Json;

namespace Strayspot.Service.Batches;

/// <summary>
/// Posts a finished batch's summary to its callback URL: bounded attempts with doubling waits, each attempt with its
/// own timeout, no redirects (a redirect could leave the allowed origins). Progress is stored, so a restart resumes
/// the attempts still due.
/// </summary>
public sealed class BatchCallbacks(BatchService batches, ILogger<BatchCallbacks> log) : IDisposable
{
    private readonly HttpClient _http = new(new SocketsHttpHandler { AllowAutoRedirect = false, UseProxy = false, ConnectTimeout = TimeSpan.FromSeconds(5) })
    {
        Timeout = Timeout.InfiniteTimeSpan,
    };
    private readonly System.Collections.Concurrent.ConcurrentDictionary<string, Task> _inFlight = new(StringComparer.Ordinal);

    /// <summary>Starts delivery for every due callback not already being delivered; never waits for one.</summary>
    public void DispatchDue(CancellationToken stopping)
    {
        foreach (var batch in batches.Store.CallbacksDue())
        {
            if (_inFlight.ContainsKey(batch.Id)) continue;
            // Replicas sharing the store: one delivers, for as long as all its attempts may take.
            if (!batches.Store.ClaimCallback(batch.Id, Owner, DeliveryTime)) continue;
            var task = Task.Run(() => DeliverAsync(batch, stopping), CancellationToken.None);
            _inFlight[batch.Id] = task;
            _ = task.ContinueWith(_ => _inFlight.TryRemove(batch.Id, out Task? _), TaskScheduler.Default);
        }
    }

    private static string Owner => Store.ClaimOwner.ThisProcess;

    /// <summary>Longest a delivery can take: every attempt's timeout plus the doubling waits, with room to spare.</summary>
    private TimeSpan DeliveryTime
    {
        get
        {
            var o = batches.Options;
            double waits = o.CallbackFirstRetry.TotalSeconds * (Math.Pow(2, o.CallbackAttempts - 1) - 1);
            return TimeSpan.FromSeconds(2 * (o.CallbackAttempts * o.CallbackTimeout.TotalSeconds + waits) + 10);
        }
    }

    /// <summary>Waits for the deliveries in progress (they stop at their next wait once the service stops).</summary>
    public Task DrainAsync() => Task.WhenAll(_inFlight.Values.ToArray());

    private async Task DeliverAsync(BatchRecord batch, CancellationToken stopping)
    {
        var o = batches.Options;
        string url = batch.CallbackUrl!;
        if (o.CheckCallback(url) is { } refused)
        {
            log.LogWarning("Callback of batch {BatchId} not sent: {Reason}", batch.Id, refused);
            batches.Store.RecordCallback(batch.Id, CallbackStates.Failed, batch.CallbackAttempts);
            return;
        }
        var body = BatchView.From(batches.Store.Get(batch.Id) ?? batch);
        for (int attempt = batch.CallbackAttempts + 1; attempt <= o.CallbackAttempts; attempt++)
        {
            string? failure;
            try
            {
                using var timeout = CancellationTokenSource.CreateLinkedTokenSource(stopping);
                timeout.CancelAfter(o.CallbackTimeout);
                using var response = await _http.PostAsJsonAsync(url, body, timeout.Token);
                if (response.IsSuccessStatusCode)
                {
                    batches.Store.RecordCallback(batch.Id, CallbackStates.Delivered, attempt);
                    log.LogInformation("Callback of batch {BatchId} delivered on attempt {Attempt}", batch.Id, attempt);
                    return;
                }
                failure = $"HTTP {(int)response.StatusCode}";
            }
            catch (OperationCanceledException) when (stopping.IsCancellationRequested)
            {
                return; // attempts so far are stored; a restart continues
            }
            catch (Exception e) when (e is HttpRequestException or OperationCanceledException)
            {
                failure = e is OperationCanceledException ? $"no answer within {o.CallbackTimeout.TotalSeconds:0.#} s" : e.Message;
            }
            bool last = attempt >= o.CallbackAttempts;
            batches.Store.RecordCallback(batch.Id, last ? CallbackStates.Failed : CallbackStates.Pending, attempt);
            log.LogWarning("Callback of batch {BatchId} attempt {Attempt}/{Max} failed: {Reason}", batch.Id, attempt, o.CallbackAttempts, failure);
            if (last) return;
            var wait = o.CallbackFirstRetry * Math.Pow(2, attempt - 1);
            try { await Task.Delay(wait, stopping); }
            catch (OperationCanceledException) { return; }
        }
        batches.Store.RecordCallback(batch.Id, CallbackStates.Failed, o.CallbackAttempts);
    }

    public void Dispose() => _http.Dispose();
}
