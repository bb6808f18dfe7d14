namespace Strayspot.Scoring.Reduction;

/// <summary>
/// The per-pixel maps of one frame after reduction, row-major H×W. Owned by the caller and reused frame to frame:
/// arrays only grow, so a steady stream of same-sized frames allocates nothing.
/// </summary>
public sealed class ReducedMaps
{
    private ushort[] _classIndex = [];
    private float[] _maxLogit = [];
    private float[] _msp = [];
    private float[] _entropy = [];
    private float[] _energy = [];

    public int Width { get; private set; }
    public int Height { get; private set; }
    public ReductionOutputs Outputs { get; private set; }
    public int PixelCount => Width * Height;

    /// <summary>Predicted class per pixel (argmax over the logits; the lowest index wins a tie).</summary>
    public Span<ushort> ClassIndex => _classIndex.AsSpan(0, PixelCount);
    public Span<float> MaxLogit => _maxLogit.AsSpan(0, PixelCount);
    /// <summary>Empty unless <see cref="ReductionOutputs.Msp"/> was requested.</summary>
    public Span<float> Msp => Has(ReductionOutputs.Msp) ? _msp.AsSpan(0, PixelCount) : default;
    /// <summary>Empty unless <see cref="ReductionOutputs.Entropy"/> was requested.</summary>
    public Span<float> Entropy => Has(ReductionOutputs.Entropy) ? _entropy.AsSpan(0, PixelCount) : default;
    /// <summary>Empty unless <see cref="ReductionOutputs.Energy"/> was requested.</summary>
    public Span<float> Energy => Has(ReductionOutputs.Energy) ? _energy.AsSpan(0, PixelCount) : default;

    // Pinned (pinned object heap) so parallel workers can write through pointers without fixing per band.
    internal ushort[] ClassIndexArray => _classIndex;
    internal float[] MaxLogitArray => _maxLogit;
    internal float[] MspArray => _msp;
    internal float[] EntropyArray => _entropy;
    internal float[] EnergyArray => _energy;

    public void EnsureSize(int width, int height, ReductionOutputs outputs)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(width, 1);
        ArgumentOutOfRangeException.ThrowIfLessThan(height, 1);
        long n = (long)width * height;
        if (n > Array.MaxLength)
            throw new ArgumentOutOfRangeException(nameof(width), $"A {width}×{height} frame has more pixels than one array can hold.");
        int count = (int)n;
        Grow(ref _classIndex, count);
        Grow(ref _maxLogit, count);
        if ((outputs & ReductionOutputs.Msp) != 0) Grow(ref _msp, count);
        if ((outputs & ReductionOutputs.Entropy) != 0) Grow(ref _entropy, count);
        if ((outputs & ReductionOutputs.Energy) != 0) Grow(ref _energy, count);
        Width = width;
        Height = height;
        Outputs = outputs;
    }

    /// <summary>
    /// Set by the last reduction into these maps: true when it read every logit and found all of them finite (the
    /// frame-sized path checks as it goes, while each row is still in cache); false when it did not check.
    /// </summary>
    internal bool LogitsCheckedFinite { get; set; }

    private bool Has(ReductionOutputs o) => (Outputs & o) != 0;

    private static void Grow<T>(ref T[] array, int count) where T : unmanaged
    {
        if (array.Length < count)
            array = GC.AllocateUninitializedArray<T>(count, pinned: true);
    }
}
