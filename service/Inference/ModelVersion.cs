using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Calibration;
using Strayspot.Service.Models;
using Strayspot.Service.Profiles;

namespace Strayspot.Service.Inference;

/// <summary>
/// One version of a model as its folder describes it: weights, descriptor, class statistics and scoring profile.
/// <see cref="Key"/> changes when any of them changes, so sessions, preprocessors and pipelines built for one
/// version are never handed out for another.
/// </summary>
public sealed class ModelVersion
{
    public const string StatisticsFile = "statistics.json";

    private ModelVersion(string name, string folder, ModelDescriptor descriptor, string? weightsSha256,
        ClassStatistics? statistics, string? statisticsSource, ScoringProfile profile, CalibrationArtifact? calibration = null)
    {
        Calibration = calibration;
        Name = name;
        Folder = folder;
        Descriptor = descriptor;
        WeightsSha256 = weightsSha256;
        Statistics = statistics;
        StatisticsSource = statisticsSource;
        Profile = profile;
        ClassNames = descriptor.Classes.Select(c => c.Name).ToList();
        var defaults = profile.Effective;
        // Without statistics SML cannot run: fall back to max logit and say so, rather than refuse to start.
        // The profile's method may not run here (SML without statistics, or a method that needs logits on a
        // probabilities model): the version still loads so another method can be asked for; scoring with the
        // defaults is refused by ModelReadiness with the fix named.
        if (defaults.Method == ScoreMethod.Sml && statistics is null)
            Warning = $"not calibrated: the sml method is refused until 'strayspot calibrate {folder} <frames-folder>' has run";
        defaults.Validate();
        Defaults = defaults;
        string descriptorJson = JsonSerializer.Serialize(descriptor);
        SessionKey = name + "@" + Hash(weightsSha256 + "\n" + descriptorJson);
        Key = KeyOf(name, weightsSha256, descriptorJson, statistics, profile);
    }

    public string Name { get; }
    public string Folder { get; }
    public ModelDescriptor Descriptor { get; }
    /// <summary>SHA-256 of model.onnx; null for a folder that only scores logits sent by clients.</summary>
    public string? WeightsSha256 { get; }
    public ClassStatistics? Statistics { get; }
    public string? StatisticsSource { get; }
    public ScoringProfile Profile { get; }
    /// <summary>The options frames are scored with when a caller gives none.</summary>
    public ScoringOptions Defaults { get; }
    public string? Warning { get; }
    public IReadOnlyList<string> ClassNames { get; }
    public int ClassCount => Descriptor.Classes.Count;
    public bool HasWeights => WeightsSha256 is not null;
    /// <summary>The calibration the statistics come from (null for statistics.json or none).</summary>
    public CalibrationArtifact? Calibration { get; }
    /// <summary>The model ends in softmax: only the methods defined on probabilities apply.</summary>
    public bool OutputsProbabilities => Descriptor.Output.Kind == "probabilities";

    /// <summary>The report warnings for one frame of this size scored with <paramref name="options"/>.</summary>
    public List<Reports.ReportWarning> WarningsFor(int frameWidth, int frameHeight, ScoringOptions options) =>
        Reports.ScoringWarnings.For(frameWidth, frameHeight, options, ClassCount, Calibration, StatisticsSource);
    public string Key { get; }
    /// <summary>What the ONNX Runtime session depends on (weights and descriptor): versions that differ only in
    /// statistics or profile share one session.</summary>
    public string SessionKey { get; }

    public string ModelPath => Path.Combine(Folder, SegmentationModel.ModelFileName);

    /// <summary>A version the catalog has already read and checked.</summary>
    public static ModelVersion Of(string name, string folder, ModelDescriptor descriptor, string? weightsSha256,
        ClassStatistics? statistics, string? statisticsSource, ScoringProfile profile, CalibrationArtifact? calibration = null) =>
        new(name, folder, descriptor, weightsSha256, statistics, statisticsSource, profile, calibration);

    /// <summary>
    /// Reads a model folder: descriptor, model.onnx's hash, class statistics (a calibration bound to those weights,
    /// else a plain statistics file) and scoring profile. Throws <see cref="ModelException"/> for what does not fit.
    /// </summary>
    public static ModelVersion Read(string folder) => Read(folder, withStatistics: true);

    /// <summary>
    /// A model folder's weights and descriptor only, for measuring a calibration: an existing calibration (perhaps
    /// measured through older weights) and the profile are not read.
    /// </summary>
    public static ModelVersion ReadForCalibration(string folder) => Read(folder, withStatistics: false);

    private static ModelVersion Read(string folder, bool withStatistics)
    {
        folder = Path.GetFullPath(folder);
        SegmentationModel.EnsureFolder(folder);
        string descriptorPath = Path.Combine(folder, ModelDescriptor.FileName);
        if (!File.Exists(descriptorPath))
            throw new ModelException(ModelErrorCodes.DescriptorInvalid, $"Model folder '{folder}' has no {ModelDescriptor.FileName}.");
        var descriptor = ModelDescriptor.Load(descriptorPath);
        descriptor.EnsureValid();
        string modelPath = Path.Combine(folder, SegmentationModel.ModelFileName);
        if (!File.Exists(modelPath))
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model file '{modelPath}' does not exist.");
        string sha = HashFile(modelPath);
        ClassStatistics? statistics = null;
        CalibrationArtifact? artifact = null;
        string? source = null;
        string calibration = Path.Combine(folder, CalibrationArtifact.FileName);
        string plain = Path.Combine(folder, StatisticsFile);
        if (!withStatistics)
            return new ModelVersion(Path.GetFileName(Path.TrimEndingDirectorySeparator(folder)), folder, descriptor, sha, null, null,
                ScoringProfile.Default.WithSurfacesOf(descriptor));
        if (File.Exists(calibration))
        {
            artifact = CalibrationArtifact.Load(calibration);
            artifact.EnsureMatches(descriptor, sha, folder);
            statistics = artifact.ToStatistics();
            source = CalibrationArtifact.FileName;
        }
        else if (File.Exists(plain))
        {
            statistics = ClassStatistics.Load(plain);
            source = StatisticsFile;
        }
        if (statistics is not null && statistics.Count != descriptor.Classes.Count)
            throw new ModelException(ModelErrorCodes.CalibrationInvalid,
                $"{source} describes {statistics.Count} classes but the model has {descriptor.Classes.Count}.");
        var profile = ScoringProfile.LoadOrDefault(folder).WithSurfacesOf(descriptor);
        return new ModelVersion(Path.GetFileName(Path.TrimEndingDirectorySeparator(folder)), folder, descriptor, sha, statistics, source, profile, artifact);
    }

    public static string HashFile(string path)
    {
        using var stream = File.OpenRead(path);
        return Convert.ToHexStringLower(SHA256.HashData(stream));
    }

    /// <summary>The statistics a pipeline with <paramref name="options"/> needs (null when its method needs none).</summary>
    public ClassStatistics? StatisticsFor(ScoringOptions options) =>
        ScoringMethods.Of(options.Method).NeedsStatistics ? Statistics : null;

    /// <summary>Fails with a clear error when <paramref name="options"/> need class statistics this version lacks.</summary>
    public void EnsureCanScore(ScoringOptions options)
    {
        var method = ScoringMethods.Of(options.Method);
        if (method.NeedsStatistics && Statistics is null)
            throw new ModelException(ModelErrorCodes.CalibrationInvalid,
                $"Model '{Name}' has no class statistics (calibration.json or statistics.json), which the {method.Name} method needs; " +
                "calibrate the model or choose another method.");
    }

    private static string KeyOf(string name, string? weights, string descriptorJson, ClassStatistics? statistics, ScoringProfile profile)
    {
        var text = new StringBuilder();
        text.Append(name).Append('\n').Append(weights ?? "-").Append('\n');
        text.Append(descriptorJson).Append('\n');
        if (statistics is not null) text.Append(JsonSerializer.Serialize(statistics.Classes)).Append(statistics.MinimumCount);
        text.Append('\n').Append(JsonSerializer.Serialize(profile)).Append(JsonSerializer.Serialize(profile.Effective));
        return name + "@" + Hash(text.ToString());
    }

    private static string Hash(string text) => Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(text)))[..16];
}
