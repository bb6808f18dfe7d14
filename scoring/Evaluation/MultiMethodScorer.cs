using System.Numerics.Tensors;
using Strayspot.Scoring.Boundaries;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Reduction;
using Strayspot.Scoring.Regions;
using Strayspot.Scoring.Smoothing;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Scoring.Evaluation;

/// <summary>The anomaly scores compared by an evaluation; <see cref="Full"/> is the whole method.</summary>
public enum EvaluatedMethod
{
    Msp,
    MaxLogit,
    Entropy,
    Energy,
    Sml,
    /// <summary>SML, then boundary suppression.</summary>
    SmlBoundary,
    /// <summary>SML, boundary suppression, dilated smoothing.</summary>
    Full,
}

/// <summary>
/// Names and pipeline equivalents of the evaluated methods: each scoring method of <see cref="ScoringMethods"/>
/// under its own name, then the SML chain's later steps (a test holds this list to the table).
/// </summary>
public static class EvaluatedMethods
{
    public static IReadOnlyList<EvaluatedMethod> All { get; } =
        [EvaluatedMethod.Msp, EvaluatedMethod.MaxLogit, EvaluatedMethod.Entropy, EvaluatedMethod.Energy,
         EvaluatedMethod.Sml, EvaluatedMethod.SmlBoundary, EvaluatedMethod.Full];

    /// <summary>The scoring method whose score the boundary and smoothing steps refine.</summary>
    public const ScoreMethod ChainBase = ScoreMethod.Sml;

    /// <summary>The scoring method an evaluated method's score starts from.</summary>
    public static ScoreMethod BaseOf(EvaluatedMethod method) => method switch
    {
        EvaluatedMethod.Msp => ScoreMethod.Msp,
        EvaluatedMethod.MaxLogit => ScoreMethod.MaxLogit,
        EvaluatedMethod.Entropy => ScoreMethod.Entropy,
        EvaluatedMethod.Energy => ScoreMethod.Energy,
        EvaluatedMethod.Sml or EvaluatedMethod.SmlBoundary or EvaluatedMethod.Full => ChainBase,
        _ => throw new ArgumentOutOfRangeException(nameof(method), method, "Unknown evaluated method."),
    };

    /// <summary>Boundary suppression applied after the base score.</summary>
    public static bool Boundary(EvaluatedMethod method) => method is EvaluatedMethod.SmlBoundary or EvaluatedMethod.Full;

    /// <summary>Dilated smoothing applied after boundary suppression.</summary>
    public static bool Smoothing(EvaluatedMethod method) => method is EvaluatedMethod.Full;

    /// <summary>The name used in reports and files: the scoring method's name, then the steps after it.</summary>
    public static string Name(EvaluatedMethod method) =>
        ScoringMethods.Of(BaseOf(method)).Name + (Boundary(method) ? "+boundary" : "") + (Smoothing(method) ? "+smoothing" : "");

    public static bool NeedsStatistics(EvaluatedMethod method) => ScoringMethods.Of(BaseOf(method)).NeedsStatistics;

    /// <summary>
    /// The <see cref="ScoringOptions"/> under which <see cref="FramePipeline"/> produces the same anomaly score map:
    /// the stage parameters, energy temperature, threshold and region filter come from <paramref name="baseOptions"/>.
    /// </summary>
    public static ScoringOptions OptionsFor(EvaluatedMethod method, ScoringOptions baseOptions) => baseOptions with
    {
        Method = BaseOf(method),
        BoundarySuppression = baseOptions.BoundarySuppression with { Enabled = Boundary(method) },
        Smoothing = baseOptions.Smoothing with { Enabled = Smoothing(method) },
    };
}

/// <summary>What a <see cref="MultiMethodScorer"/> computes and how it counts.</summary>
public sealed record MultiMethodOptions
{
    /// <summary>Stage parameters (boundary suppression, smoothing, energy temperature) shared by the methods.</summary>
    public ScoringOptions Base { get; init; } = new();
    public IReadOnlyList<EvaluatedMethod> Methods { get; init; } = EvaluatedMethods.All;
    /// <summary>Keep every pixel's score (<see cref="ExactPixelMetrics"/>) instead of fixed-size histograms.</summary>
    public bool Exact { get; init; }
    /// <summary>Histogram bins per method in the streaming mode.</summary>
    public int Bins { get; init; } = 1 << 16;
    /// <summary>
    /// Streaming histogram range per method. A method without one gets a fixed range where the score is bounded
    /// (MSP: [−1, 0]; entropy: [0, ln C]) and otherwise the first frame's range widened by twice its width on each
    /// side; scores falling outside are counted in <see cref="MethodMetrics.Clamped"/>.
    /// </summary>
    public IReadOnlyDictionary<EvaluatedMethod, (float Min, float Max)>? ScoreRanges { get; init; }
    /// <summary>When set, region metrics of <see cref="EvaluatedMethod.Full"/> are accumulated with the mask
    /// "score strictly above this" (the pipeline's mask rule).</summary>
    public float? RegionThreshold { get; init; }
    /// <summary>Threads per frame in the reduction (−1: the runtime decides); the host sets it.</summary>
    public int MaxDegreeOfParallelism { get; init; } = -1;
}

/// <summary>One method's result over all accumulated frames.</summary>
public sealed record MethodMetrics(
    EvaluatedMethod Method,
    string Name,
    PixelMetricsResult Pixels,
    long Clamped,
    float? RangeMin,
    float? RangeMax,
    RegionMetricsResult? Regions);

/// <summary>
/// Scores one frame's logits with every evaluated method from a single reduction (class, max logit, MSP, entropy,
/// energy computed in one pass), so the network and the reduction run once per frame whatever the number of
/// methods; the SML chain reuses each step for the next (SML → boundary suppression → smoothing). Each method's map
/// feeds its own pixel-metrics accumulator. Buffers are owned and reused from frame to frame: not thread-safe.
/// </summary>
public sealed class MultiMethodScorer
{
    private readonly MultiMethodOptions _options;
    private readonly EvaluatedMethod[] _methods;
    private readonly PixelReduction _reduction;
    private readonly ReducedMaps _maps = new();
    private readonly StandardizedMaxLogit? _sml;
    private readonly bool _chain;
    private readonly BoundarySuppression? _boundary;
    private readonly DilatedSmoothing? _smoothing;
    private readonly float[][] _score = new float[EvaluatedMethods.All.Count][];
    private readonly bool[] _wanted = new bool[EvaluatedMethods.All.Count];
    private readonly ExactPixelMetrics?[] _exact = new ExactPixelMetrics?[EvaluatedMethods.All.Count];
    private readonly StreamingPixelMetrics?[] _streaming = new StreamingPixelMetrics?[EvaluatedMethods.All.Count];
    private readonly RegionMetrics? _regions;
    private byte[] _mask = [], _labels = [];
    private int _classCount;

    public MultiMethodScorer(ClassStatistics? statistics, MultiMethodOptions? options = null)
    {
        _options = options ?? new MultiMethodOptions();
        var baseOptions = _options.Base;
        baseOptions.Validate();
        if (_options.Methods.Count == 0)
            throw new ScoringInputException(EvaluationErrorCodes.Argument, "At least one method must be evaluated; got none.");
        if (!_options.Exact && (_options.Bins < 2 || _options.Bins > 1 << 24))
            throw new ScoringInputException(EvaluationErrorCodes.Argument, $"The bin count must be between 2 and {1 << 24}; got {_options.Bins}.");
        foreach (var m in _options.Methods)
        {
            if (!Enum.IsDefined(m))
                throw new ScoringInputException(EvaluationErrorCodes.Argument, $"Unknown evaluated method {(int)m}.");
            if (_wanted[(int)m])
                throw new ScoringInputException(EvaluationErrorCodes.Argument, $"Method '{EvaluatedMethods.Name(m)}' is listed twice.");
            _wanted[(int)m] = true;
        }
        _methods = [.. _options.Methods];
        if (_options.RegionThreshold is float t && (!float.IsFinite(t) || !_wanted[(int)EvaluatedMethod.Full]))
            throw new ScoringInputException(EvaluationErrorCodes.Argument,
                $"Region metrics need a finite threshold and the full method among the methods; got threshold {t}.");

        var outputs = ScoringMethods.OutputsOf(_methods.Select(EvaluatedMethods.BaseOf));
        _reduction = new PixelReduction(outputs, baseOptions.EnergyTemperature) { MaxDegreeOfParallelism = _options.MaxDegreeOfParallelism };

        _chain = _methods.Any(m => EvaluatedMethods.BaseOf(m) == EvaluatedMethods.ChainBase);
        bool anySml = _methods.Any(EvaluatedMethods.NeedsStatistics);
        if (anySml)
        {
            if (statistics is null)
                throw new ScoringInputException(ScoringErrorCodes.StatisticsMismatch,
                    "The SML methods need class statistics (a calibration or statistics file); none were given.");
            _sml = new StandardizedMaxLogit(statistics);
        }
        Statistics = statistics;
        if (_wanted[(int)EvaluatedMethod.SmlBoundary] || _wanted[(int)EvaluatedMethod.Full])
            _boundary = new BoundarySuppression(baseOptions.BoundarySuppression with { Enabled = true });
        if (_wanted[(int)EvaluatedMethod.Full])
            _smoothing = new DilatedSmoothing(baseOptions.Smoothing with { Enabled = true });
        if (_options.RegionThreshold is not null) _regions = new RegionMetrics();
        for (int i = 0; i < _score.Length; i++) _score[i] = [];
    }

    public IReadOnlyList<EvaluatedMethod> Methods => _methods;
    public ClassStatistics? Statistics { get; }
    public bool Exact => _options.Exact;
    public int Width { get; private set; }
    public int Height { get; private set; }
    public int PixelCount => Width * Height;
    public int FramesAccumulated { get; private set; }

    /// <summary>Max logit of the last scored frame (for the drift watch).</summary>
    public ReadOnlySpan<float> MaxLogit => _maps.MaxLogit;

    /// <summary>Predicted class of the last scored frame.</summary>
    public ReadOnlySpan<ushort> ClassIndex => _maps.ClassIndex;

    /// <summary>The last scored frame's anomaly score map of <paramref name="method"/> (valid until the next frame).</summary>
    public ReadOnlySpan<float> Map(EvaluatedMethod method)
    {
        if (!Enum.IsDefined(method) || !_wanted[(int)method])
            throw new ScoringInputException(EvaluationErrorCodes.Argument, $"Method '{method}' is not evaluated by this scorer.");
        return _score[(int)method].AsSpan(0, PixelCount);
    }

    /// <summary>Scores one frame's logits, resized to <paramref name="frameHeight"/>×<paramref name="frameWidth"/>, with every method.</summary>
    public void Score(LogitsView logits, int frameHeight, int frameWidth)
    {
        if (frameHeight < 1 || frameWidth < 1)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize, $"Frame size must be positive; got {frameHeight}×{frameWidth}.");
        _sml?.EnsureClassCount(logits.Channels);
        LogitsValidation.EnsureFinite(logits);
        _reduction.Reduce(logits, frameHeight, frameWidth, _maps);
        Width = frameWidth;
        Height = frameHeight;
        _classCount = logits.Channels;
        int n = frameWidth * frameHeight;
        foreach (var m in _methods)
            if (_score[(int)m].Length < n) _score[(int)m] = new float[n];

        foreach (var m in _methods)
        {
            // The chain's steps are made below, each from the one before.
            if (EvaluatedMethods.BaseOf(m) == EvaluatedMethods.ChainBase) continue;
            var method = ScoringMethods.Of(EvaluatedMethods.BaseOf(m));
            method.Kernel(_maps, method.NeedsStatistics ? _sml : null, Buffer(m, n));
        }
        if (_sml is null || !_chain) return;

        // Each SML step starts from the previous step's map, so the chain costs what the full method alone costs.
        var chain = ChainBuffer(EvaluatedMethod.Sml, n);
        ScoringMethods.Of(EvaluatedMethods.ChainBase).Kernel(_maps, _sml, chain);
        if (_boundary is null) return;
        var next = ChainBuffer(EvaluatedMethod.SmlBoundary, n);
        if (next != chain) { chain.CopyTo(next); chain = next; }
        _boundary.Apply(chain, _maps.ClassIndex, frameWidth, frameHeight);
        if (_smoothing is null) return;
        next = Buffer(EvaluatedMethod.Full, n);
        if (next != chain) chain.CopyTo(next);
        _smoothing.Apply(next, frameWidth, frameHeight);
    }

    private Span<float> Buffer(EvaluatedMethod m, int n) => _score[(int)m].AsSpan(0, n);

    // A step nobody asked for is computed in the buffer of the next step that was asked for.
    private Span<float> ChainBuffer(EvaluatedMethod step, int n)
    {
        for (var m = step; m <= EvaluatedMethod.Full; m++)
            if (_wanted[(int)m]) return Buffer(m, n);
        throw new InvalidOperationException("An SML step was computed although no SML method is evaluated.");
    }

    /// <summary>
    /// Counts the last scored frame against its ground truth (0 in-distribution, 1 anomaly, 255 ignore) in every
    /// method's accumulator, and, with a region threshold, in the full method's region metrics.
    /// </summary>
    public RegionFrameScores? Accumulate(ReadOnlySpan<byte> labels)
    {
        int n = PixelCount;
        if (n == 0)
            throw new ScoringInputException(EvaluationErrorCodes.Argument, "Score a frame before accumulating its labels.");
        if (labels.Length != n)
            throw new ScoringInputException(EvaluationErrorCodes.LengthMismatch,
                $"The labels must cover the {Width}×{Height} frame ({n} values); got {labels.Length}.");
        PixelInput.Validate(_score[(int)_methods[0]].AsSpan(0, n), labels);
        if (!_options.Exact) EnsureHistograms(n);
        // The accumulators are independent: one method per worker.
        if (_labels.Length < n) _labels = new byte[n];
        labels.CopyTo(_labels);
        var labelArray = _labels;
        Parallel.For(0, _methods.Length, i =>
        {
            int m = (int)_methods[i];
            var score = _score[m].AsSpan(0, n);
            var label = labelArray.AsSpan(0, n);
            if (_options.Exact) (_exact[m] ??= new ExactPixelMetrics()).Add(score, label);
            else _streaming[m]!.Add(score, label);
        });
        FramesAccumulated++;
        if (_regions is null) return null;
        if (_mask.Length < n) _mask = new byte[n];
        var mask = _mask.AsSpan(0, n);
        AnomalyMask.Threshold(Map(EvaluatedMethod.Full), _options.RegionThreshold!.Value, mask);
        return _regions.Add(mask, labels, Width, Height);
    }

    private void EnsureHistograms(int n)
    {
        foreach (var method in _methods)
        {
            int m = (int)method;
            if (_streaming[m] is not null) continue;
            var (lo, hi) = RangeFor(method, _score[m].AsSpan(0, n));
            _streaming[m] = new StreamingPixelMetrics(lo, hi, _options.Bins);
        }
    }

    private (float Min, float Max) RangeFor(EvaluatedMethod method, ReadOnlySpan<float> firstFrame)
    {
        if (_options.ScoreRanges is { } given && given.TryGetValue(method, out var r)) return r;
        switch (method)
        {
            case EvaluatedMethod.Msp:
                return (-1f, 0f);
            case EvaluatedMethod.Entropy:
                return (0f, (float)Math.Log(Math.Max(2, _classCount)) * 1.001f + 1e-3f);
        }
        float lo = TensorPrimitives.Min(firstFrame), hi = TensorPrimitives.Max(firstFrame);
        float width = Math.Max(hi - lo, 1e-3f * Math.Max(1f, Math.Max(Math.Abs(lo), Math.Abs(hi))));
        return (lo - 2 * width, hi + 2 * width);
    }

    /// <summary>Every method's metrics over the accumulated frames.</summary>
    public IReadOnlyList<MethodMetrics> Compute(double tprTarget = 0.95, double? fprTarget = null, bool curves = false)
    {
        if (FramesAccumulated == 0)
            throw new ScoringInputException(EvaluationErrorCodes.OneClass, "No frame was accumulated, so there is nothing to evaluate.");
        var results = new List<MethodMetrics>(_methods.Length);
        RegionMetricsResult? regions = _regions?.Compute();
        foreach (var method in _methods)
        {
            int m = (int)method;
            PixelMetricsResult pixels;
            long clamped = 0;
            float? lo = null, hi = null;
            if (_options.Exact) pixels = _exact[m]!.Compute(tprTarget, fprTarget, curves);
            else
            {
                var h = _streaming[m]!;
                pixels = h.Compute(tprTarget, fprTarget, curves);
                clamped = h.Clamped;
                lo = h.MinScore;
                hi = h.MaxScore;
            }
            results.Add(new MethodMetrics(method, EvaluatedMethods.Name(method), pixels, clamped, lo, hi,
                method == EvaluatedMethod.Full ? regions : null));
        }
        return results;
    }

    /// <summary>Bytes held by the pixel accumulators: fixed in the streaming mode, growing with the pixels in the exact mode.</summary>
    public long AccumulatorBytes
    {
        get
        {
            long bytes = 0;
            foreach (var m in _methods)
            {
                if (_streaming[(int)m] is { } h) bytes += 16L * h.Bins;
                if (_exact[(int)m] is { } e) bytes += 4L * (e.Positives + e.Negatives);
            }
            return bytes;
        }
    }
}
