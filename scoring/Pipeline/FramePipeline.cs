using System.Diagnostics;
using Strayspot.Scoring.Boundaries;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Reduction;
using Strayspot.Scoring.Regions;
using Strayspot.Scoring.Smoothing;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Scoring.Pipeline;

/// <summary>
/// Logits in, anomaly score, mask and regions out: the stages composed in their fixed order.
/// One instance owns every buffer and reuses it from frame to frame, so it is not thread-safe:
/// use one per worker. A <see cref="FrameScoring"/> stays valid until the next call to <see cref="Score"/>.
/// </summary>
public sealed class FramePipeline
{
    private readonly ScoringOptions _options;
    private readonly ScoringMethod _method;
    private readonly PixelReduction _reduction;
    private readonly StandardizedMaxLogit? _sml;
    private readonly BoundarySuppression? _boundary;
    private readonly DilatedSmoothing? _smoothing;
    private readonly RegionFinder _regions = new();
    private readonly ReducedMaps _maps = new();
    private readonly ReductionOutputs _outputs;
    private readonly RegionFilter _filter;
    private float[] _score = [];
    private byte[] _mask = [];

    /// <param name="maxDegreeOfParallelism">Threads per frame in the parallel stages (−1: the runtime decides); the host sets it.</param>
    public FramePipeline(ScoringOptions options, ClassStatistics? statistics, int maxDegreeOfParallelism = -1)
    {
        options.Validate();
        _options = options;
        _method = ScoringMethods.Of(options.Method);
        _outputs = _method.Outputs;
        _reduction = new PixelReduction(_outputs, options.EnergyTemperature) { MaxDegreeOfParallelism = maxDegreeOfParallelism };
        if (_method.NeedsStatistics)
        {
            if (statistics is null)
                throw new ScoringInputException(ScoringErrorCodes.StatisticsMismatch,
                    $"The {_method.Name} method needs class statistics (a calibration or statistics file); none were given.");
            _sml = new StandardizedMaxLogit(statistics);
        }
        Statistics = statistics;
        if (options.BoundarySuppression.Enabled) _boundary = new BoundarySuppression(options.BoundarySuppression);
        if (options.Smoothing.Enabled) _smoothing = new DilatedSmoothing(options.Smoothing);
        _filter = options.RegionFilter();
    }

    public ScoringOptions Options => _options;
    public ClassStatistics? Statistics { get; }

    /// <summary>The reduction outputs a method reads besides class and max logit.</summary>
    public static ReductionOutputs OutputsFor(ScoreMethod method) => ScoringMethods.Of(method).Outputs;

    /// <summary>Scores one frame's logits, resized to the frame's <paramref name="frameHeight"/>×<paramref name="frameWidth"/>.</summary>
    public FrameScoring Score(LogitsView logits, int frameHeight, int frameWidth)
    {
        if (frameHeight < 1 || frameWidth < 1)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize, $"Frame size must be positive; got {frameHeight}×{frameWidth}.");
        if (_sml is not null) Statistics!.EnsureClassCount(logits.Channels);
        var timings = new StageTimings();
        long t0 = Stopwatch.GetTimestamp();

        _maps.EnsureSize(frameWidth, frameHeight, _outputs);
        _reduction.Reduce(logits, frameHeight, frameWidth, _maps);
        // Non-finite logits are refused before any score comes of them; the frame-sized reduction has checked already.
        if (!_maps.LogitsCheckedFinite) LogitsValidation.EnsureFinite(logits);
        long t1 = Stopwatch.GetTimestamp();
        timings.Reduction = Stopwatch.GetElapsedTime(t0, t1);

        int n = frameWidth * frameHeight;
        if (_score.Length < n) { _score = new float[n]; _mask = new byte[n]; }
        var score = _score.AsSpan(0, n);
        AnomalyScore(score);
        long t2 = Stopwatch.GetTimestamp();
        timings.Standardization = Stopwatch.GetElapsedTime(t1, t2);

        _boundary?.Apply(score, _maps.ClassIndex, frameWidth, frameHeight);
        long t3 = Stopwatch.GetTimestamp();
        timings.BoundarySuppression = Stopwatch.GetElapsedTime(t2, t3);

        _smoothing?.Apply(score, frameWidth, frameHeight);
        long t4 = Stopwatch.GetTimestamp();
        timings.Smoothing = Stopwatch.GetElapsedTime(t3, t4);

        var mask = _mask.AsSpan(0, n);
        long flagged = AnomalyMask.Threshold(score, _options.Threshold, mask);
        var regions = _regions.Find(mask, frameWidth, frameHeight, score, _maps.ClassIndex, logits.Channels, _filter);
        float frameScore = FrameScore.Compute(score);
        long t5 = Stopwatch.GetTimestamp();
        timings.Regions = Stopwatch.GetElapsedTime(t4, t5);
        timings.Total = Stopwatch.GetElapsedTime(t0, t5);

        return new FrameScoring(frameWidth, frameHeight, logits.Channels, _maps, _score, _mask, regions,
            frameScore, flagged, timings)
        {
            LogitsHeight = logits.Height, LogitsWidth = logits.Width, Method = _options.Method, Threshold = _options.Threshold,
        };
    }

    private void AnomalyScore(Span<float> score) => _method.Kernel(_maps, _sml, score);
}

/// <summary>Wall time of each stage for one frame.</summary>
public sealed class StageTimings
{
    public TimeSpan Reduction { get; set; }
    public TimeSpan Standardization { get; set; }
    public TimeSpan BoundarySuppression { get; set; }
    public TimeSpan Smoothing { get; set; }
    public TimeSpan Regions { get; set; }
    public TimeSpan Total { get; set; }
}

/// <summary>One frame's result. Its maps are the pipeline's buffers: read them before the next frame.</summary>
public sealed class FrameScoring
{
    private readonly ReducedMaps _maps;
    private readonly float[] _score;
    private readonly byte[] _mask;

    internal FrameScoring(int width, int height, int classCount, ReducedMaps maps, float[] score, byte[] mask,
        RegionSet regions, float frameScore, long flaggedPixels, StageTimings timings)
    {
        Width = width; Height = height; ClassCount = classCount;
        _maps = maps; _score = score; _mask = mask;
        Regions = regions; FrameScore = frameScore; FlaggedPixels = flaggedPixels; Timings = timings;
    }

    public int Width { get; }
    public int Height { get; }
    public int ClassCount { get; }
    /// <summary>Size of the logits the frame was scored from (after any padding was cut off).</summary>
    public int LogitsHeight { get; init; }
    public int LogitsWidth { get; init; }
    /// <summary>The method and threshold the frame was scored with, so its pictures can show the scale.</summary>
    public ScoreMethod Method { get; init; }
    public float Threshold { get; init; }
    public ReadOnlySpan<ushort> ClassIndex => _maps.ClassIndex;
    public ReadOnlySpan<float> MaxLogit => _maps.MaxLogit;
    public ReadOnlySpan<float> AnomalyScore => _score.AsSpan(0, Width * Height);
    public ReadOnlySpan<byte> Mask => _mask.AsSpan(0, Width * Height);
    public RegionSet Regions { get; }
    public float FrameScore { get; }
    public long FlaggedPixels { get; }
    public double AnomalousShare => (double)FlaggedPixels / ((long)Width * Height);
    public StageTimings Timings { get; }
}
