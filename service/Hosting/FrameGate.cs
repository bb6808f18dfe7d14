using Microsoft.Extensions.Options;

namespace Strayspot.Service.Hosting;

/// <summary>
/// Bounds the frames scored at once and the frames waiting for a slot. A request that finds the queue full is
/// refused at once (429) instead of piling up: memory stays bounded however fast frames arrive.
/// </summary>
public sealed class FrameGate : IDisposable
{
    private readonly SemaphoreSlim _slots;
    private readonly int _maxQueued;
    private int _queued;
    // Recent time one frame held a slot, for the Retry-After hint; an exponential average, in ticks.
    private long _averageHoldTicks = TimeSpan.FromMilliseconds(250).Ticks;

    public FrameGate(int slots, int maxQueued)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(slots, 1);
        ArgumentOutOfRangeException.ThrowIfNegative(maxQueued);
        Slots = slots;
        _maxQueued = maxQueued;
        _slots = new SemaphoreSlim(slots, slots);
    }

    public FrameGate(IOptions<ServiceOptions> options) : this(options.Value.MaxConcurrentFrames, options.Value.MaxQueuedFrames) { }

    public int Slots { get; }
    public int Queued => Volatile.Read(ref _queued);
    public int Busy => Slots - _slots.CurrentCount;

    /// <summary>
    /// A lease on a slot, or null when the queue is full. Throws <see cref="OperationCanceledException"/>
    /// when <paramref name="ct"/> fires while waiting.
    /// </summary>
    public async ValueTask<Lease?> TryEnterAsync(CancellationToken ct)
    {
        if (_slots.Wait(0)) return new Lease(this);
        if (Interlocked.Increment(ref _queued) > _maxQueued)
        {
            Interlocked.Decrement(ref _queued);
            return null;
        }
        try
        {
            await _slots.WaitAsync(ct).ConfigureAwait(false);
        }
        finally
        {
            Interlocked.Decrement(ref _queued);
        }
        return new Lease(this);
    }

    /// <summary>Seconds a refused client should wait: roughly the time to drain the queue once.</summary>
    public int RetryAfterSeconds()
    {
        double perFrame = TimeSpan.FromTicks(Interlocked.Read(ref _averageHoldTicks)).TotalSeconds;
        double drain = perFrame * (Queued + Slots) / Slots;
        return (int)Math.Clamp(Math.Ceiling(drain), 1, 60);
    }

    private void Release(TimeSpan held)
    {
        long old = Interlocked.Read(ref _averageHoldTicks);
        Interlocked.Exchange(ref _averageHoldTicks, old + (held.Ticks - old) / 8);
        _slots.Release();
    }

    public void Dispose() => _slots.Dispose();

    public sealed class Lease : IDisposable
    {
        private readonly FrameGate _gate;
        private readonly long _start = System.Diagnostics.Stopwatch.GetTimestamp();
        private int _released;

        internal Lease(FrameGate gate) => _gate = gate;

        public void Dispose()
        {
            if (Interlocked.Exchange(ref _released, 1) == 0)
                _gate.Release(System.Diagnostics.Stopwatch.GetElapsedTime(_start));
        }
    }
}
