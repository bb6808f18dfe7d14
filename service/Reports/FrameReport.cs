using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Regions;

namespace Strayspot.Service.Reports;

/// <summary>The JSON answer for one frame: what was scored, how, and what was found.</summary>
public sealed record FrameReport
{
    [JsonPropertyName("frameId")] public string? FrameId { get; init; }
    [JsonPropertyName("frame")] public SizeReport Frame { get; init; } = new(0, 0);
    [JsonPropertyName("logits")] public LogitsReport Logits { get; init; } = new(0, 0, 0);
    [JsonPropertyName("model")] public ModelReport? Model { get; init; }
    /// <summary>Higher anomaly score means more unknown, whatever the method.</summary>
    [JsonPropertyName("scoreConvention")] public string ScoreConvention { get; init; } = "higher-is-more-anomalous";
    [JsonPropertyName("method")] public ScoreMethod Method { get; init; }
    [JsonPropertyName("parameters")] public ScoringOptions Parameters { get; init; } = new();
    [JsonPropertyName("threshold")] public float Threshold { get; init; }
    [JsonPropertyName("frameScore")] public float FrameScore { get; init; }
    /// <summary>Lowest and highest anomaly score in the frame; also the scale of the 16-bit score PNG.</summary>
    [JsonPropertyName("scoreRange")] public ScoreRange? ScoreRange { get; init; }
    /// <summary>The scores the heat map's colours span (the overlay's legend shows the same).</summary>
    [JsonPropertyName("heatScale")] public Rendering.HeatScale? HeatScale { get; init; }
    [JsonPropertyName("flaggedPixels")] public long FlaggedPixels { get; init; }
    [JsonPropertyName("anomalousShare")] public double AnomalousShare { get; init; }
    [JsonPropertyName("regions")] public IReadOnlyList<RegionReport> Regions { get; init; } = [];
    [JsonPropertyName("timingsMs")] public Dictionary<string, double> TimingsMs { get; init; } = new();
    [JsonPropertyName("artifacts")] public Dictionary<string, string>? Artifacts { get; init; }
    /// <summary>Why this result deserves doubt (see <see cref="ScoringWarnings"/>); empty when nothing was noticed.</summary>
    [JsonPropertyName("warnings")] public IReadOnlyList<ReportWarning> Warnings { get; init; } = [];
    [JsonPropertyName("notice")] public string Notice { get; init; } = SafetyNotice.Text;

    public static FrameReport From(FrameScoring s, ScoringOptions options, IReadOnlyList<string>? classNames, string? frameId = null,
        ModelReport? model = null, LogitsReport? logits = null)
    {
        var regions = new List<RegionReport>(s.Regions.Regions.Count);
        foreach (var r in s.Regions.Regions) regions.Add(RegionReport.From(r, classNames));
        var t = s.Timings;
        return new FrameReport
        {
            FrameId = frameId,
            Frame = new SizeReport(s.Width, s.Height),
            Logits = logits ?? new LogitsReport(s.ClassCount, s.LogitsHeight, s.LogitsWidth),
            Model = model,
            Method = options.Method,
            Parameters = options,
            Threshold = options.Threshold,
            FrameScore = s.FrameScore,
            ScoreRange = new ScoreRange(System.Numerics.Tensors.TensorPrimitives.Min(s.AnomalyScore), System.Numerics.Tensors.TensorPrimitives.Max(s.AnomalyScore)),
            HeatScale = Rendering.HeatScale.Fixed(options.Method, options.Threshold),
            FlaggedPixels = s.FlaggedPixels,
            AnomalousShare = s.AnomalousShare,
            Regions = regions,
            TimingsMs = new()
            {
                ["reduction"] = t.Reduction.TotalMilliseconds,
                ["standardization"] = t.Standardization.TotalMilliseconds,
                ["boundarySuppression"] = t.BoundarySuppression.TotalMilliseconds,
                ["smoothing"] = t.Smoothing.TotalMilliseconds,
                ["regions"] = t.Regions.TotalMilliseconds,
                ["scoringTotal"] = t.Total.TotalMilliseconds,
            },
        };
    }

    public static readonly JsonSerializerOptions JsonOptions = new()
    {
        WriteIndented = true,
        DefaultIgnoreCondition = JsonIgnoreCondition.WhenWritingNull,
        PropertyNamingPolicy = JsonNamingPolicy.CamelCase,
        NumberHandling = JsonNumberHandling.AllowNamedFloatingPointLiterals,
    };
}

/// <summary>A 16-bit score PNG value v stands for Min + v·(Max − Min)/65535.</summary>
public sealed record ScoreRange([property: JsonPropertyName("min")] float Min, [property: JsonPropertyName("max")] float Max);

public sealed record SizeReport([property: JsonPropertyName("width")] int Width, [property: JsonPropertyName("height")] int Height);

public sealed record LogitsReport(
    [property: JsonPropertyName("classes")] int Classes,
    [property: JsonPropertyName("height")] int Height,
    [property: JsonPropertyName("width")] int Width);

public sealed record ModelReport(
    [property: JsonPropertyName("name")] string Name,
    [property: JsonPropertyName("sha256")] string Sha256,
    [property: JsonPropertyName("profileVersion")] string? ProfileVersion);

public sealed record RegionReport
{
    [JsonPropertyName("id")] public int Id { get; init; }
    [JsonPropertyName("box")] public BoxReport Box { get; init; } = new(0, 0, 0, 0);
    [JsonPropertyName("area")] public long Area { get; init; }
    [JsonPropertyName("areaShare")] public double AreaShare { get; init; }
    [JsonPropertyName("centroid")] public double[] Centroid { get; init; } = [];
    [JsonPropertyName("maxScore")] public float MaxScore { get; init; }
    [JsonPropertyName("meanScore")] public float MeanScore { get; init; }
    [JsonPropertyName("classBeneath")] public int ClassBeneath { get; init; }
    [JsonPropertyName("classBeneathName")] public string? ClassBeneathName { get; init; }
    [JsonPropertyName("classBeneathShare")] public double ClassBeneathShare { get; init; }
    [JsonPropertyName("onSurface")] public bool OnSurface { get; init; }

    public static RegionReport From(Region r, IReadOnlyList<string>? classNames) => new()
    {
        Id = r.Id,
        Box = new BoxReport(r.Left, r.Top, r.Width, r.Height),
        Area = r.Area,
        AreaShare = r.AreaShare,
        Centroid = [Math.Round(r.CentroidX, 2), Math.Round(r.CentroidY, 2)],
        MaxScore = r.MaxScore,
        MeanScore = r.MeanScore,
        ClassBeneath = r.MajorityClass,
        ClassBeneathName = classNames is not null && r.MajorityClass < classNames.Count ? classNames[r.MajorityClass] : null,
        ClassBeneathShare = r.MajorityShare,
        OnSurface = r.OnSurface,
    };
}

public sealed record BoxReport(
    [property: JsonPropertyName("x")] int X,
    [property: JsonPropertyName("y")] int Y,
    [property: JsonPropertyName("width")] int Width,
    [property: JsonPropertyName("height")] int Height);

public static class SafetyNotice
{
    public const string Text =
        "Data-triage and monitoring aid, not a certified safety function; validate it on your own data and follow your local rules.";
}
