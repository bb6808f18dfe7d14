using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Standardization;

/// <summary>Max-logit statistics of one predicted class, measured on in-distribution frames.</summary>
public sealed record ClassStatistic(
    [property: JsonPropertyName("name")] string Name,
    [property: JsonPropertyName("count")] long Count,
    [property: JsonPropertyName("mean")] double Mean,
    [property: JsonPropertyName("std")] double Std);

/// <summary>
/// Per-class count, mean and standard deviation of the max logit: what SML standardizes with.
/// The JSON form is the statistics file; a calibration artifact is a superset of it.
/// </summary>
public sealed class ClassStatistics
{
    /// <summary>Below this many pixels, or this standard deviation, a class uses the pooled fallback.</summary>
    public const long DefaultMinimumCount = 100;
    public const double MinimumStd = 1e-6;

    public ClassStatistics(IReadOnlyList<ClassStatistic> classes, long minimumCount = DefaultMinimumCount)
    {
        if (classes.Count == 0)
            throw new ScoringInputException(ScoringErrorCodes.StatisticsFormat, "Class statistics list no class.");
        for (int i = 0; i < classes.Count; i++)
        {
            var c = classes[i];
            if (c.Count < 0 || !double.IsFinite(c.Mean) || !double.IsFinite(c.Std) || c.Std < 0)
                throw new ScoringInputException(ScoringErrorCodes.StatisticsFormat,
                    $"Class {i} ('{c.Name}') has invalid statistics: count={c.Count}, mean={c.Mean}, std={c.Std}.");
        }
        Classes = classes;
        MinimumCount = minimumCount;
    }

    [JsonPropertyName("classes")]
    public IReadOnlyList<ClassStatistic> Classes { get; }

    [JsonPropertyName("minimumCount")]
    public long MinimumCount { get; }

    [JsonIgnore]
    public int Count => Classes.Count;

    /// <summary>Fails with the two numbers when the statistics were made for another class count.</summary>
    public void EnsureClassCount(int channels)
    {
        if (channels != Classes.Count)
            throw new ScoringInputException(ScoringErrorCodes.StatisticsMismatch,
                $"The logits have {channels} classes but the class statistics describe {Classes.Count}.");
    }

    public static ClassStatistics Load(string path)
    {
        using var stream = File.OpenRead(path);
        return Read(stream, path);
    }

    public static ClassStatistics Read(Stream stream, string source = "statistics")
    {
        StatisticsFile? file;
        try
        {
            file = JsonSerializer.Deserialize<StatisticsFile>(stream, JsonOptions);
        }
        catch (JsonException e)
        {
            throw new ScoringInputException(ScoringErrorCodes.StatisticsFormat, $"{source} is not a valid statistics file: {e.Message}");
        }
        if (file?.Classes is null)
            throw new ScoringInputException(ScoringErrorCodes.StatisticsFormat, $"{source} has no 'classes' list.");
        return new ClassStatistics(file.Classes, file.MinimumCount ?? DefaultMinimumCount);
    }

    public void Save(string path)
    {
        using var stream = File.Create(path);
        JsonSerializer.Serialize(stream, new StatisticsFile { Classes = Classes.ToList(), MinimumCount = MinimumCount }, JsonOptions);
    }

    internal static readonly JsonSerializerOptions JsonOptions = new() { WriteIndented = true };

    private sealed class StatisticsFile
    {
        [JsonPropertyName("classes")] public List<ClassStatistic>? Classes { get; set; }
        [JsonPropertyName("minimumCount")] public long? MinimumCount { get; set; }
    }
}
