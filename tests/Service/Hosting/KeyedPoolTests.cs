using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Hosting;

public class KeyedPoolTests
{
    private sealed class Worker : IDisposable
    {
        public bool Disposed;
        public void Dispose() => Disposed = true;
    }

    [Fact]
    public void Returned_objects_are_reused_per_key_only()
    {
        var pool = new KeyedPool<Worker>(perKey: 2, maxKeys: 8);
        var a = pool.Rent("m1", () => new Worker());
        pool.Return("m1", a);
        Assert.Same(a, pool.Rent("m1", () => new Worker()));
        pool.Return("m1", a);
        Assert.NotSame(a, pool.Rent("m2", () => new Worker()));
    }

    [Fact]
    public void Idle_objects_per_key_and_keys_are_bounded()
    {
        var pool = new KeyedPool<Worker>(perKey: 2, maxKeys: 3);
        var w = Enumerable.Range(0, 3).Select(_ => new Worker()).ToArray();
        foreach (var x in w) pool.Return("m1", x);
        Assert.Equal(2, pool.IdleCount("m1"));
        Assert.True(w[2].Disposed);
        for (int k = 0; k < 10; k++) pool.Return("k" + k, new Worker());
        Assert.InRange(pool.KeyCount, 1, 3);
    }
}
