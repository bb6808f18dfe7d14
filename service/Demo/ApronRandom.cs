namespace Strayspot.Service.Demo;

/// <summary>
/// Small permuted congruential generator: the demo's scenes and model must come out identical on every run and
/// machine, so nothing here depends on time, threads or the runtime's own random implementation.
/// </summary>
public sealed class ApronRandom
{
    private ulong _state;
    private const ulong Increment = 1442695040888963407UL;

    public ApronRandom(long seed)
    {
        _state = 0;
        NextUInt();
        _state += unchecked((ulong)seed * 0x9E3779B97F4A7C15UL);
        NextUInt();
    }

    public uint NextUInt()
    {
        ulong old = _state;
        _state = unchecked(old * 6364136223846793005UL + Increment);
        uint xorShifted = (uint)(((old >> 18) ^ old) >> 27);
        int rot = (int)(old >> 59);
        return (xorShifted >> rot) | (xorShifted << ((-rot) & 31));
    }

    /// <summary>Uniform in [0, 1).</summary>
    public double NextDouble() => NextUInt() * (1.0 / 4294967296.0);

    public float Range(float min, float max) => (float)(min + (max - min) * NextDouble());

    /// <summary>Uniform integer in [0, count).</summary>
    public int Next(int count) => count <= 0 ? 0 : (int)(NextDouble() * count);

    public int Next(int min, int maxExclusive) => min + Next(maxExclusive - min);

    public bool Chance(double p) => NextDouble() < p;

    public T Pick<T>(IReadOnlyList<T> items) => items[Next(items.Count)];
}

/// <summary>Seeded lattice value noise: smooth stains, clouds and grain that stay the same for a given seed.</summary>
public readonly struct ApronNoise
{
    private readonly uint _seed;

    public ApronNoise(uint seed) => _seed = seed;

    /// <summary>Hash of a lattice point to [-1, 1].</summary>
    public float Lattice(int x, int y)
    {
        uint h = unchecked((uint)x * 0x8DA6B343u ^ (uint)y * 0xD8163841u ^ _seed * 0xCB1AB31Fu);
        h ^= h >> 15; h = unchecked(h * 0x2C1B3C6Du);
        h ^= h >> 12; h = unchecked(h * 0x297A2D39u);
        h ^= h >> 15;
        return (h & 0xFFFFFF) * (2f / 0xFFFFFF) - 1f;
    }

    /// <summary>Smoothly interpolated noise with lattice spacing <paramref name="cellX"/> × <paramref name="cellY"/> pixels, in [-1, 1].</summary>
    public float Value(float x, float y, float cellX, float cellY)
    {
        float fx = x / cellX, fy = y / cellY;
        int ix = (int)MathF.Floor(fx), iy = (int)MathF.Floor(fy);
        float tx = fx - ix, ty = fy - iy;
        tx = tx * tx * (3 - 2 * tx);
        ty = ty * ty * (3 - 2 * ty);
        float a = Lattice(ix, iy), b = Lattice(ix + 1, iy), c = Lattice(ix, iy + 1), d = Lattice(ix + 1, iy + 1);
        float top = a + (b - a) * tx, bottom = c + (d - c) * tx;
        return top + (bottom - top) * ty;
    }

    /// <summary>Three octaves of <see cref="Value"/>, roughly in [-1, 1].</summary>
    public float Fractal(float x, float y, float cell)
    {
        return 0.57f * Value(x, y, cell, cell)
             + 0.29f * Value(x + 17.3f, y + 5.1f, cell * 0.5f, cell * 0.5f)
             + 0.14f * Value(x + 3.7f, y + 41.9f, cell * 0.25f, cell * 0.25f);
    }
}
