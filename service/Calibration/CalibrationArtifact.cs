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
    /// <summary>Preprocessing, output, class names and frame size the statistics were measured through; absent in older files.</summary>
    [JsonPropertyName("measuredWith")] public CalibrationBinding? MeasuredWith { get; init; }
    [JsonPropertyName("toolVersion")] public string ToolVersion { get; init; } = "";
    [JsonPropertyName("createdUtc")] public DateTimeOffset CreatedUtc { get; init; }

    private static readonly JsonSerializerOptions Options = new() { WriteIndented = true };

    public ClassStatistics ToStatistics() => new(Classes, MinimumCount);

    /// <summary>Refuses a calibration measured with other weights, preprocessing, output or class names, naming what changed.</summary>
    public void EnsureMatches(SegmentationModel model) =>
        EnsureMatches(model.Descriptor, model.ModelSha256, Path.GetDirectoryName(Path.GetFullPath(model.ModelPath))!);

    /// <inheritdoc cref="EnsureMatches(SegmentationModel)"/>
    public void EnsureMatches(ModelDescriptor descriptor, string modelSha256, string modelFolder)
    {
        string again = $"The statistics would standardize with the wrong means; calibrate again: strayspot calibrate {modelFolder} <folder of ordinary frames>.";
        if (!string.Equals(ModelSha256, modelSha256, StringComparison.OrdinalIgnoreCase))
            throw new ModelException(ModelErrorCodes.CalibrationModelMismatch,
                $"{FileName} was measured with the model of SHA-256 {ModelSha256}, but the loaded model's is {modelSha256}. {again}");
        if (Classes.Count != descriptor.Classes.Count)
            throw new ModelException(ModelErrorCodes.CalibrationModelMismatch,
                $"{FileName} describes {Classes.Count} classes but the descriptor lists {descriptor.Classes.Count}. {again}");
        if (MeasuredWith is null)
        {
            // Older files carry only the descriptor's hash: equal means nothing changed; otherwise we cannot tell what did.
            if (!string.Equals(DescriptorSha256, Calibrator.DescriptorSha256(descriptor), StringComparison.OrdinalIgnoreCase))
                throw new ModelException(ModelErrorCodes.CalibrationModelMismatch,
                    $"{FileName} predates the record of preprocessing, and descriptor.json has changed since it was measured. {again}");
            return;
        }
        var changes = MeasuredWith.Differences(descriptor);
        if (changes.Count > 0)
            throw new ModelException(ModelErrorCodes.CalibrationModelMismatch,
                $"{FileName} was measured through other settings than descriptor.json now has:\n  - {string.Join("\n  - ", changes)}\n{again}");
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
