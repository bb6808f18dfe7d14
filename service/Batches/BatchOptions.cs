namespace Strayspot.Service.Batches;

/// <summary>Settings of durable batches: section <c>Service:Batches</c>.</summary>
public sealed class BatchOptions
{
    public const string Section = "Service:Batches";

    /// <summary>The batch database; default DataRoot/.strayspot/batches.db.</summary>
    public string? DatabasePath { get; set; }
    /// <summary>Where batch folders (uploaded frames, per-frame outputs, manifest) go; default DataRoot/batches.</summary>
    public string? Root { get; set; }
    /// <summary>Batches worked on at the same time; frames of one batch are scored one after another.</summary>
    public int ParallelBatches { get; set; } = 1;
    /// <summary>Rest after each frame so interactive requests get the cores; zero scores back to back.</summary>
    public TimeSpan PauseBetweenFrames { get; set; } = TimeSpan.Zero;
    public int MaxFramesPerBatch { get; set; } = 100_000;
    /// <summary>Largest number of entries an uploaded archive may hold (directories included).</summary>
    public int MaxArchiveEntries { get; set; } = 10_000;
    /// <summary>Largest total uncompressed size of an uploaded archive, declared or actually extracted.</summary>
    public long MaxArchiveBytes { get; set; } = 2L * 1024 * 1024 * 1024;
    /// <summary>
    /// Where completion callbacks may go: entries are origins such as <c>https://labeling.example:8443</c>
    /// (scheme, host and port must all match). Empty: callbacks are refused.
    /// </summary>
    public List<string> CallbackOrigins { get; set; } = new();
    public int CallbackAttempts { get; set; } = 5;
    /// <summary>Wait before the second attempt; doubled for each further one.</summary>
    public TimeSpan CallbackFirstRetry { get; set; } = TimeSpan.FromSeconds(2);
    public TimeSpan CallbackTimeout { get; set; } = TimeSpan.FromSeconds(10);
    /// <summary>How often the worker looks for work when nothing woke it.</summary>
    public TimeSpan PollInterval { get; set; } = TimeSpan.FromSeconds(5);

    /// <summary>
    /// How long a claimed frame stays this replica's without a renewal; renewed every third of it while the frame is
    /// scored. After a replica dies its frames wait this long before another takes them.
    /// </summary>
    public TimeSpan LeaseTime { get; set; } = TimeSpan.FromSeconds(30);
    /// <summary>This replica takes only batch work: the scoring API (/v1) is not served; health, readiness and metrics are.</summary>
    public bool WorkerOnly { get; set; }
    /// <summary>Stop the process once no batch is left to work on anywhere (a Kubernetes Job's pods end this way).</summary>
    public bool ExitWhenIdle { get; set; }

    public string ResolveDatabase(string dataRoot) => Path.GetFullPath(DatabasePath ?? Path.Combine(dataRoot, ".strayspot", "batches.db"));
    public string ResolveRoot(string dataRoot) => Path.GetFullPath(Root ?? Path.Combine(dataRoot, "batches"));

    /// <summary>The reasons a callback URL is refused, or null when it may be used.</summary>
    public string? CheckCallback(string url)
    {
        if (!Uri.TryCreate(url, UriKind.Absolute, out var uri) || (uri.Scheme != Uri.UriSchemeHttp && uri.Scheme != Uri.UriSchemeHttps))
            return $"The callback URL '{url}' is not an absolute http or https URL.";
        if (!string.IsNullOrEmpty(uri.UserInfo))
            return "The callback URL must not carry credentials.";
        foreach (string origin in CallbackOrigins)
        {
            if (Uri.TryCreate(origin, UriKind.Absolute, out var allowed) &&
                string.Equals(allowed.Scheme, uri.Scheme, StringComparison.OrdinalIgnoreCase) &&
                string.Equals(allowed.IdnHost, uri.IdnHost, StringComparison.OrdinalIgnoreCase) &&
                allowed.Port == uri.Port)
                return null;
        }
        return CallbackOrigins.Count == 0
            ? "Completion callbacks are off: no origin is allowed (Service:Batches:CallbackOrigins)."
            : $"The callback origin {uri.Scheme}://{uri.Authority} is not allowed (Service:Batches:CallbackOrigins).";
    }

    public IEnumerable<string> Validate()
    {
        if (ParallelBatches is < 1 or > 64) yield return $"Service:Batches:ParallelBatches must be 1..64; got {ParallelBatches}.";
        if (PauseBetweenFrames < TimeSpan.Zero) yield return $"Service:Batches:PauseBetweenFrames must not be negative; got {PauseBetweenFrames}.";
        if (MaxFramesPerBatch < 1) yield return $"Service:Batches:MaxFramesPerBatch must be positive; got {MaxFramesPerBatch}.";
        if (MaxArchiveEntries < 1) yield return $"Service:Batches:MaxArchiveEntries must be positive; got {MaxArchiveEntries}.";
        if (MaxArchiveBytes < 1024) yield return $"Service:Batches:MaxArchiveBytes must be at least 1024; got {MaxArchiveBytes}.";
        if (CallbackAttempts is < 1 or > 20) yield return $"Service:Batches:CallbackAttempts must be 1..20; got {CallbackAttempts}.";
        if (CallbackFirstRetry < TimeSpan.Zero) yield return $"Service:Batches:CallbackFirstRetry must not be negative; got {CallbackFirstRetry}.";
        if (CallbackTimeout <= TimeSpan.Zero) yield return $"Service:Batches:CallbackTimeout must be positive; got {CallbackTimeout}.";
        if (LeaseTime < TimeSpan.FromMilliseconds(300)) yield return $"Service:Batches:LeaseTime must be at least 300 ms; got {LeaseTime}.";
        if (PollInterval <= TimeSpan.Zero) yield return $"Service:Batches:PollInterval must be positive; got {PollInterval}.";
        foreach (string o in CallbackOrigins)
            if (!Uri.TryCreate(o, UriKind.Absolute, out var u) || (u.Scheme != Uri.UriSchemeHttp && u.Scheme != Uri.UriSchemeHttps))
                yield return $"Service:Batches:CallbackOrigins entry '{o}' is not an http or https origin.";
    }
}
