using System.Collections.Concurrent;

namespace Strayspot.Service.Hosting;

/// <summary>
/// Reusable objects that are not thread-safe (one scoring pipeline per worker), kept per key (model + options) so a
/// frame finds buffers already sized for its model. Bounded: at most <c>perKey</c> idle objects per key and
/// <c>maxKeys</c> keys; past that, idle objects are dropped rather than hoarded.
/// </summary>
public sealed class KeyedPool<T>(int perKey, int maxKeys) where T : class
{
    private readonly ConcurrentDictionary<string, ConcurrentBag<T>> _idle = new(StringComparer.Ordinal);

    public int KeyCount => _idle.Count;

    public int IdleCount(string key) => _idle.TryGetValue(key, out var bag) ? bag.Count : 0;

    public T Rent(string key, Func<T> create) =>
        _idle.TryGetValue(key, out var bag) && bag.TryTake(out var item) ? item : create();

    public void Return(string key, T item)
    {
        if (!_idle.TryGetValue(key, out var bag))
        {
            // Many distinct option sets (per-request overrides): forget them all rather than grow without bound.
            if (_idle.Count >= maxKeys) _idle.Clear();
            bag = _idle.GetOrAdd(key, _ => new ConcurrentBag<T>());
        }
        if (bag.Count < perKey) bag.Add(item);
        else (item as IDisposable)?.Dispose();
    }
}
