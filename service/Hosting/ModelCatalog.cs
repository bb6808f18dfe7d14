using System.Text.Json;
using System.Text.Json.Nodes;
using Microsoft.Extensions.Options;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Models;
using Strayspot.Service.Profiles;

namespace Strayspot.Service.Hosting;

/// <summary>What the class statistics of a model say, for listings.</summary>
public sealed record CalibrationSummary(
    string File,
    int ClassCount,
    long? FrameCount,
    IReadOnlyList<string> FallbackClasses);

/// <summary>
/// One model folder as found on disk. A folder that fails to load stays listed with its <see cref="Error"/>,
/// so an operator sees why, instead of the model silently missing.
/// </summary>
public sealed record CatalogEntry(
    string Name,
    string Folder,
    ModelDescriptor? Descriptor,
    ClassStatistics? Statistics,
    CalibrationSummary? Calibration,
    ScoringProfile Profile,
    string? Error)
{
    /// <summary>SHA-256 of model.onnx when the folder has one (logits-only folders do not).</summary>
    public string? Sha256 { get; init; }

    /// <summary>The stable code of <see cref="Error"/>, when the failure had one (e.g. calibration-model-mismatch).</summary>
    public string? ErrorCode { get; init; }

    /// <summary>What the frame runner borrows: weights, descriptor, statistics and profile as one version; null when unusable.</summary>
    public Inference.ModelVersion? Version { get; init; }

    public bool IsUsable => Error is null && Descriptor is not null && Version is not null;
}

/// <summary>
/// The models under ModelsRoot: every subfolder holding <c>descriptor.json</c>, named by its folder. Read once at
/// start and on <see cref="Reload"/>; readers see a consistent snapshot.
/// </summary>
public sealed class ModelCatalog(IOptions<ServiceOptions> options, ILogger<ModelCatalog> log)
{
    public const string DescriptorFile = "descriptor.json";
    public const string CalibrationFile = "calibration.json";
    public const string StatisticsFile = "statistics.json";

    private volatile Snapshot? _snapshot;

    public bool IsLoaded => _snapshot is not null;

    public IReadOnlyList<CatalogEntry> Models => _snapshot?.List ?? [];

    public bool TryGet(string name, out CatalogEntry entry)
    {
        entry = null!;
        return _snapshot is { } s && s.ByName.TryGetValue(name, out entry!);
    }

    public void Reload()
    {
        string root = Path.GetFullPath(options.Value.ModelsRoot);
        var list = new List<CatalogEntry>();
        if (Directory.Exists(root))
        {
            foreach (string folder in Directory.EnumerateDirectories(root).Order(StringComparer.Ordinal))
            {
                if (!File.Exists(Path.Combine(folder, DescriptorFile))) continue;
                var entry = LoadEntry(folder);
                if (entry.Error is not null)
                    log.LogWarning("Model {Model} is unusable: {Reason}", entry.Name, entry.Error);
                list.Add(entry);
            }
        }
        _snapshot = new Snapshot(list, list.ToDictionary(e => e.Name, StringComparer.Ordinal));
        log.LogInformation("Model catalog loaded from {ModelsRoot}: {Usable} usable of {Count}",
            root, list.Count(e => e.IsUsable), list.Count);
    }

    public static CatalogEntry LoadEntry(string folder)
    {
        string name = Path.GetFileName(Path.TrimEndingDirectorySeparator(folder));
        ModelDescriptor? descriptor = null;
        ClassStatistics? statistics = null;
        CalibrationSummary? calibration = null;
        ScoringProfile profile = ScoringProfile.Default;
        try
        {
            descriptor = ReadDescriptor(Path.Combine(folder, DescriptorFile));
            (statistics, calibration) = ReadStatistics(folder);
            profile = ScoringProfile.LoadOrDefault(folder).WithSurfacesOf(descriptor);
            if (statistics is not null && statistics.Count != descriptor.Classes.Count)
                throw new ScoringInputException(ScoringErrorCodes.StatisticsMismatch,
                    $"{calibration!.File} describes {statistics.Count} classes but {DescriptorFile} lists {descriptor.Classes.Count}.");
            string? sha = HashModel(folder);
            Strayspot.Service.Calibration.CalibrationArtifact? artifact = null;
            if (calibration?.File == CalibrationFile)
            {
                artifact = Strayspot.Service.Calibration.CalibrationArtifact.Load(Path.Combine(folder, CalibrationFile));
                // Statistics measured through other weights would standardize with the wrong means: refuse them.
                if (sha is not null) artifact.EnsureMatches(descriptor, sha, folder);
            }
            // The calibration rides along so frame reports can warn about frames far from its size.
            var version = Inference.ModelVersion.Of(name, folder, descriptor, sha, statistics, calibration?.File, profile, artifact);
            return new CatalogEntry(name, folder, descriptor, statistics, calibration, profile, null) { Sha256 = sha, Version = version };
        }
        catch (Exception e) when (e is ScoringInputException or ModelException or IOException or UnauthorizedAccessException or JsonException)
        {
            return new CatalogEntry(name, folder, descriptor, statistics, calibration, profile, e.Message) { ErrorCode = (e as Strayspot.Scoring.CodedException)?.Code };
        }
    }

    private static string? HashModel(string folder)
    {
        string path = Path.Combine(folder, SegmentationModel.ModelFileName);
        if (!File.Exists(path)) return null;
        using var stream = File.OpenRead(path);
        return Convert.ToHexStringLower(System.Security.Cryptography.SHA256.HashData(stream));
    }

    private static ModelDescriptor ReadDescriptor(string path) => ModelDescriptor.Load(path);

    /// <summary>calibration.json (a superset of the statistics file) wins over a bare statistics.json.</summary>
    private static (ClassStatistics?, CalibrationSummary?) ReadStatistics(string folder)
    {
        foreach (string file in new[] { CalibrationFile, StatisticsFile })
        {
            string path = Path.Combine(folder, file);
            if (!File.Exists(path)) continue;
            var statistics = ClassStatistics.Load(path);
            var fallback = statistics.Classes
                .Where(c => c.Count < statistics.MinimumCount || c.Std < ClassStatistics.MinimumStd)
                .Select(c => c.Name)
                .ToList();
            return (statistics, new CalibrationSummary(file, statistics.Count, ReadFrameCount(path), fallback));
        }
        return (null, null);
    }

    private static long? ReadFrameCount(string path)
    {
        using var stream = File.OpenRead(path);
        var node = JsonNode.Parse(stream);
        return node?["frameCount"] is JsonValue v && v.TryGetValue<long>(out long n) ? n : null;
    }

    private sealed record Snapshot(IReadOnlyList<CatalogEntry> List, IReadOnlyDictionary<string, CatalogEntry> ByName);
}

/// <summary>Loads the catalog before the server takes requests.</summary>
public sealed class ModelCatalogLoader(ModelCatalog catalog) : IHostedService
{
    public Task StartAsync(CancellationToken cancellationToken)
    {
        catalog.Reload();
        return Task.CompletedTask;
    }

    public Task StopAsync(CancellationToken cancellationToken) => Task.CompletedTask;
}
