using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Models;

namespace Strayspot.Service.Calibration;

/// <summary>
/// <c>calibration.json</c>: the statistics file (classes, minimumCount; readable by <see cref="ClassStatistics.Read"/>)
/// plus where it came from, so it is only applied to the exact model it was measured with.
/// </summary>
public sealed record CalibrationArtifact
{
    public const string FileName = "calibration.json";

    [JsonPropertyName("classes")] public List<ClassStatistic> Classes { get; init; } = [];
    [JsonPropertyName("minimumCount")] public long MinimumCount { get; init; } = ClassStatistics.DefaultMinimumCount;
    [JsonPropertyName("modelSha256")] public string ModelSha256 { get; init; } = "";
    [JsonPropertyName("descriptorSha256")] public string DescriptorSha256 { get; init; } = "";
    [JsonPropertyName("frameCount")] public long FrameCount { get; init; }
    /// <summary>Classes with too few pixels (or no spread) to trust: SML uses the pooled fallback for them.</summary>
    [JsonPropertyName("fallbackClasses")] public List<string> FallbackClasses { get; init; } = [];
    /// <summary>True when only pixels whose prediction matched a ground-truth label were counted.</summary>
    [JsonPropertyName("labelFiltered")] public bool LabelFiltered { get; init; }
    [JsonPropertyName("toolVersion")] public string ToolVersion { get; init; } = "";
    [JsonPropertyName("createdUtc")] public DateTimeOffset CreatedUtc { get; init; }

    private static readonly JsonSerializerOptions Options = new() { WriteIndented = true };

    public ClassStatistics ToStatistics() => new(Classes, MinimumCount);

    /// <summary>Refuses a calibration measured with other weights, naming both hashes.</summary>
    public void EnsureMatches(SegmentationModel model) => EnsureMatches(model.ModelSha256, model.ClassCount);

    public void EnsureMatches(string modelSha256, int classCount)
    {
        if (!string.Equals(ModelSha256, modelSha256, StringComparison.OrdinalIgnoreCase))
            throw new ModelException(ModelErrorCodes.CalibrationModelMismatch,
                $"The calibration was measured with the model of SHA-256 {ModelSha256}, but the loaded model's is {modelSha256}. Re-run calibrate for this model.");
        if (Classes.Count != classCount)
            throw new ModelException(ModelErrorCodes.CalibrationModelMismatch,
                $"The calibration describes {Classes.Count} classes but the model has {classCount}.");
    }

    /// <summary>Loads a calibration and checks that it was measured with <paramref name="model"/>.</summary>
    public static CalibrationArtifact LoadFor(SegmentationModel model, string path)
    {
        var artifact = Load(path);
        artifact.EnsureMatches(model);
        return artifact;
    }

    public void Save(string path) => AtomicFile.Write(path, s => JsonSerializer.Serialize(s, this, Options));

    public static CalibrationArtifact Load(string path)
    {
        CalibrationArtifact? a;
        try
        {
            using var s = File.OpenRead(path);
            a = JsonSerializer.Deserialize<CalibrationArtifact>(s, Options);
        }
        catch (JsonException e)
        {
            throw new ModelException(ModelErrorCodes.CalibrationInvalid, $"'{path}' is not a valid calibration file: {e.Message}", e);
        }
        if (a is null || a.Classes is null || a.Classes.Count == 0 || string.IsNullOrEmpty(a.ModelSha256))
            throw new ModelException(ModelErrorCodes.CalibrationInvalid, $"'{path}' lacks classes or modelSha256.");
        try { a.ToStatistics(); }
        catch (Strayspot.Scoring.Logits.ScoringInputException e)
        {
            throw new ModelException(ModelErrorCodes.CalibrationInvalid, $"'{path}': {e.Message}", e);
        }
        return a;
    }
}
