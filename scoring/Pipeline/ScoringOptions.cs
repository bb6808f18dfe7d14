using System.Text.Json.Serialization;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Regions;

namespace Strayspot.Scoring.Pipeline;

/// <summary>How the per-pixel anomaly score is made from the logits.</summary>
[JsonConverter(typeof(JsonStringEnumConverter<ScoreMethod>))]
public enum ScoreMethod
{
    /// <summary>Max softmax probability; anomaly score = −MSP.</summary>
    [JsonStringEnumMemberName("msp")] Msp,
    /// <summary>Max logit; anomaly score = −max logit.</summary>
    [JsonStringEnumMemberName("maxlogit")] MaxLogit,
    /// <summary>Softmax entropy; anomaly score = entropy (nats).</summary>
    [JsonStringEnumMemberName("entropy")] Entropy,
    /// <summary>Energy −T·logsumexp(l/T); anomaly score = energy.</summary>
    [JsonStringEnumMemberName("energy")] Energy,
    /// <summary>Standardized max logit; anomaly score = −SML.</summary>
    [JsonStringEnumMemberName("sml")] Sml,
}

/// <summary>Iterative boundary suppression: widths r_i = max(1, r0 − i·Δr) for i = 0..n−1.</summary>
public sealed record BoundarySuppressionOptions
{
    public bool Enabled { get; init; } = true;
    /// <summary>r0, Chebyshev radius of the first round (recalled default).</summary>
    public int InitialWidth { get; init; } = 4;
    /// <summary>Δr, how much the width shrinks each round (recalled default).</summary>
    public int WidthStep { get; init; } = 1;
    /// <summary>n, number of rounds (recalled default).</summary>
    public int Iterations { get; init; } = 4;

    public int WidthAt(int iteration) => Math.Max(1, InitialWidth - iteration * WidthStep);
}

/// <summary>A k×k Gaussian sampled at dilation d, replicate border.</summary>
public sealed record SmoothingOptions
{
    public bool Enabled { get; init; } = true;
    /// <summary>k, odd (recalled default).</summary>
    public int KernelSize { get; init; } = 7;
    /// <summary>σ in taps, not pixels (recalled default).</summary>
    public double Sigma { get; init; } = 1.0;
    /// <summary>d, pixels between taps (recalled default).</summary>
    public int Dilation { get; init; } = 6;
}

/// <summary>Everything that decides one frame's scores, mask and regions.</summary>
public sealed record ScoringOptions
{
    public ScoreMethod Method { get; init; } = ScoreMethod.Sml;
    /// <summary>T of the energy score.</summary>
    public double EnergyTemperature { get; init; } = 1.0;
    public BoundarySuppressionOptions BoundarySuppression { get; init; } = new();
    public SmoothingOptions Smoothing { get; init; } = new();
    /// <summary>Pixels with anomaly score strictly above this are in the mask.</summary>
    public float Threshold { get; init; } = 2.0f;
    /// <summary>Regions smaller than this many pixels are dropped.</summary>
    public int MinimumRegionArea { get; init; } = 64;
    /// <summary>When set, only regions on or touching one of these class indices are kept.</summary>
    public IReadOnlyList<int>? SurfaceClasses { get; init; }

    /// <summary>
    /// Surface classes known from the model's own description: they mark each region on or off a surface without
    /// dropping any. <see cref="SurfaceClasses"/>, when set, wins and filters. Not part of a stored profile.
    /// </summary>
    [JsonIgnore]
    public IReadOnlyList<int>? MarkedSurfaceClasses { get; init; }

    /// <summary>The region filter these options describe.</summary>
    public RegionFilter RegionFilter() => SurfaceClasses is not null
        ? new RegionFilter(MinimumRegionArea, SurfaceClasses)
        : new RegionFilter(MinimumRegionArea, MarkedSurfaceClasses, KeepOnlyOnSurface: false);

    /// <summary>Fails with the offending value; call before scoring anything.</summary>
    public void Validate()
    {
        static void Fail(string m) => throw new ScoringInputException(ScoringErrorCodes.Options, m);
        if (!Enum.IsDefined(Method)) Fail($"Unknown scoring method {(int)Method}.");
        if (!(EnergyTemperature > 0) || !double.IsFinite(EnergyTemperature)) Fail($"Energy temperature must be positive; got {EnergyTemperature}.");
        var b = BoundarySuppression;
        if (b.Enabled)
        {
            if (b.InitialWidth < 1 || b.InitialWidth > 64) Fail($"Boundary width r0 must be 1..64; got {b.InitialWidth}.");
            if (b.WidthStep < 0 || b.WidthStep > 64) Fail($"Boundary width step must be 0..64; got {b.WidthStep}.");
            if (b.Iterations < 1 || b.Iterations > 64) Fail($"Boundary iterations must be 1..64; got {b.Iterations}.");
        }
        var s = Smoothing;
        if (s.Enabled)
        {
            if (s.KernelSize < 1 || s.KernelSize % 2 == 0 || s.KernelSize > 63) Fail($"Smoothing kernel size must be odd, 1..63; got {s.KernelSize}.");
            if (!(s.Sigma > 0) || !double.IsFinite(s.Sigma)) Fail($"Smoothing sigma must be positive; got {s.Sigma}.");
            if (s.Dilation < 1 || s.Dilation > 64) Fail($"Smoothing dilation must be 1..64; got {s.Dilation}.");
        }
        if (!float.IsFinite(Threshold)) Fail($"Threshold must be a finite number; got {Threshold}.");
        if (MinimumRegionArea < 1) Fail($"Minimum region area must be at least 1 pixel; got {MinimumRegionArea}.");
        if (SurfaceClasses is not null)
            foreach (int c in SurfaceClasses)
                if (c < 0) Fail($"Surface class indices must not be negative; got {c}.");
    }
}
