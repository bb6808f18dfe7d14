using System.Collections.Concurrent;
using System.Numerics;
using System.Runtime.CompilerServices;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Reduction;

/// <summary>
/// Upsamples logits [C,h,w] to the frame size H×W and reduces each pixel over the classes in one pass: predicted class
/// (argmax, lowest index on ties) and max logit, optionally MSP, entropy (nats) and energy. The upsampling is the
/// ONNX <c>Resize</c> operator with mode=linear, coordinate_transformation_mode=half_pixel (no antialias, also when
/// shrinking); equal sizes copy. The C×H×W upsampled tensor is never materialized: each worker keeps two source rows
/// resampled horizontally and blends them per output row, so memory stays O(C·W) per thread.
/// Keep one instance per stream of frames: it keeps the interpolation tables of the last frame size and per-thread
/// scratch, so steady-state frames allocate nothing. Concurrent calls are safe (each takes its own scratch).
/// </summary>
public sealed unsafe partial class PixelReduction
{
    /// <summary>Floats per cached source row: two fit a core's L2 cache beside the outputs (common practice: stay in L2).</summary>
    private const int RowBudgetFloats = 1 << 16;

    private static readonly int Lanes = Vector<float>.Count;

    private readonly ConcurrentStack<Worker> _workers = new();
    private readonly float _temperature;
    private readonly bool _needSoftmax;
    private ResampleAxis? _xs, _ys;

    public PixelReduction(ReductionOutputs outputs = ReductionOutputs.None, double energyTemperature = 1.0)
    {
        const ReductionOutputs all = ReductionOutputs.Msp | ReductionOutputs.Entropy | ReductionOutputs.Energy;
        if ((outputs & ~all) != 0)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"Unknown reduction outputs value {(int)outputs}.");
        if (!double.IsFinite(energyTemperature) || energyTemperature <= 0 || (float)energyTemperature == 0)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"The energy temperature must be a positive number; got {energyTemperature}.");
        Outputs = outputs;
        EnergyTemperature = energyTemperature;
        _temperature = (float)energyTemperature;
        _needSoftmax = outputs != ReductionOutputs.None;
    }

    public ReductionOutputs Outputs { get; }
    public double EnergyTemperature { get; }

    /// <summary>Upper bound on threads per frame (−1: the runtime decides); the host sets it from configuration.</summary>
    public int MaxDegreeOfParallelism
    {
        get => _parallel.MaxDegreeOfParallelism;
        init => _parallel = new ParallelOptions { MaxDegreeOfParallelism = value is -1 or > 0 ? value
            : throw new ScoringInputException(ScoringErrorCodes.Options, $"MaxDegreeOfParallelism must be −1 or positive; got {value}.") };
    }

    private readonly ParallelOptions _parallel = new();

    public void Reduce(LogitsView logits, int frameHeight, int frameWidth, ReducedMaps into)
    {
        ArgumentNullException.ThrowIfNull(into);
        if (logits.Data.Length == 0)
            throw new ScoringInputException(ScoringErrorCodes.LogitsShape, "The logits view is empty.");
        if (frameHeight < 1 || frameWidth < 1 || (long)frameHeight * frameWidth > Array.MaxLength)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize,
                $"The frame must be at least 1×1 and at most {Array.MaxLength} pixels; got {frameWidth}×{frameHeight} (W×H).");
        if (logits.Channels > ushort.MaxValue)
            throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                $"At most {ushort.MaxValue} classes are supported; the logits have {logits.Channels}.");

        into.EnsureSize(frameWidth, frameHeight, Outputs);
        into.LogitsCheckedFinite = false;
        var job = new Job(this, logits, frameHeight, frameWidth, into);
        using var pin = logits.Data.Pin();
        job.Source = (float*)pin.Pointer;
        // Rows narrower than one vector go through the resampling path, whose tables then copy exactly.
        bool identity = logits.Height == frameHeight && logits.Width == frameWidth && frameWidth >= Lanes;
        if (!identity)
        {
            // Tables are immutable once built and published whole, so concurrent frames can share this instance.
            var xs = _xs;
            if (xs is null || xs.InLength != logits.Width || xs.OutLength != frameWidth)
            {
                xs = ResampleAxis.Create(logits.Width, frameWidth, (frameWidth + Lanes - 1) / Lanes * Lanes);
                xs.BuildWindows(Lanes);
                _xs = xs;
            }
            var ys = _ys;
            if (ys is null || ys.InLength != logits.Height || ys.OutLength != frameHeight)
                _ys = ys = ResampleAxis.Create(logits.Height, frameHeight, frameHeight);
            job.Xs = xs;
            job.Ys = ys;
        }

        // More bands than cores balances load when other work shares the machine; each band re-reads at most two source rows.
        int threads = MaxDegreeOfParallelism > 0 ? Math.Min(MaxDegreeOfParallelism, Environment.ProcessorCount) : Environment.ProcessorCount;
        int bands = Math.Clamp(frameHeight / 8, 1, threads * 4);
        if (threads == 1) bands = 1;
        if (bands == 1)
        {
            var worker = Rent(job);
            job.RunBand(0, 1, worker, identity);
            _workers.Push(worker);
        }
        else
            Parallel.For(0, bands, _parallel,
                () => Rent(job),
                (band, _, worker) => { job.RunBand(band, bands, worker, identity); return worker; },
                worker => _workers.Push(worker));
        into.LogitsCheckedFinite = identity && job.NonFinite == 0;
    }

    private Worker Rent(Job job)
    {
        if (!_workers.TryPop(out var worker)) worker = new Worker();
        worker.Prepare(job.Channels, job.TileBlocks, job.Width);
        return worker;
    }

    /// <summary>Everything one frame's bands share.</summary>
    private sealed class Job
    {
        public Job(PixelReduction owner, LogitsView logits, int height, int width, ReducedMaps into)
        {
            Owner = owner;
            Channels = logits.Channels;
            InHeight = logits.Height;
            InWidth = logits.Width;
            Height = height;
            Width = width;
            Maps = into;
            int blocks = (width + Lanes - 1) / Lanes;
            TileBlocks = Math.Clamp(RowBudgetFloats / (Channels * Lanes), 1, blocks);
        }

        public readonly PixelReduction Owner;
        public readonly int Channels, InHeight, InWidth, Height, Width, TileBlocks;
        public readonly ReducedMaps Maps;
        public float* Source;
        public ResampleAxis? Xs, Ys;
        /// <summary>1 once a band has met a NaN or infinite logit (the frame-sized path checks every logit).</summary>
        public int NonFinite;

        public void RunBand(int band, int bands, Worker worker, bool identity)
        {
            int y0 = (int)((long)Height * band / bands), y1 = (int)((long)Height * (band + 1) / bands);
            if (identity) Owner.RunIdentityRows(this, worker, y0, y1);
            else Owner.RunResizedRows(this, worker, y0, y1);
        }
    }

    /// <summary>Per-thread scratch, reused across bands and frames.</summary>
    private sealed class Worker
    {
        public float[] Slot0 = [], Slot1 = [];
        public int Tag0 = -1, Tag1 = -1;
        public float[] Values = [];
        public float[] RowMax = [], RowMsp = [], RowEntropy = [], RowEnergy = [];
        public int[] RowClass = [];

        public void Prepare(int channels, int tileBlocks, int width)
        {
            int lanes = Lanes;
            Grow(ref Slot0, tileBlocks * channels * lanes);
            Grow(ref Slot1, tileBlocks * channels * lanes);
            Grow(ref Values, channels * lanes);
            int row = (width + lanes - 1) / lanes * lanes + lanes;
            Grow(ref RowMax, row);
            Grow(ref RowMsp, row);
            Grow(ref RowEntropy, row);
            Grow(ref RowEnergy, row);
            Grow(ref RowClass, row);
            Tag0 = Tag1 = -1;
        }

        private static void Grow<T>(ref T[] a, int n) where T : unmanaged
        {
            if (a.Length < n) a = GC.AllocateUninitializedArray<T>(n, pinned: true);
        }
    }

    /// <summary>Destination pointers for one output row (the worker's row scratch).</summary>
    private readonly struct RowOut(Worker w)
    {
        public readonly float* Max = (float*)Unsafe.AsPointer(ref w.RowMax[0]);
        public readonly int* Class = (int*)Unsafe.AsPointer(ref w.RowClass[0]);
        public readonly float* Msp = (float*)Unsafe.AsPointer(ref w.RowMsp[0]);
        public readonly float* Entropy = (float*)Unsafe.AsPointer(ref w.RowEntropy[0]);
        public readonly float* Energy = (float*)Unsafe.AsPointer(ref w.RowEnergy[0]);
        public readonly float* Values = (float*)Unsafe.AsPointer(ref w.Values[0]);
    }
}
