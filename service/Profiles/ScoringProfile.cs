using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Service.Profiles;

/// <summary>
/// How one model's frames are scored by default: method, stage parameters and threshold, versioned so every
/// frame report can say which profile made it. Stored as <c>profile.json</c> in the model's folder.
/// </summary>
public sealed record ScoringProfile
{
    public const string FileName = "profile.json";
    public const string DefaultVersion = "default";

    [JsonPropertyName("version")] public string Version { get; init; } = DefaultVersion;
    [JsonPropertyName("options")] public ScoringOptions Options { get; init; } = new();
    [JsonPropertyName("createdUtc")] public DateTimeOffset? CreatedUtc { get; init; }
    [JsonPropertyName("note")] public string? Note { get; init; }

    /// <summary>When given, overrides <c>options.method</c> (a shorthand for hand-written profiles).</summary>
    [JsonPropertyName("method")] public ScoreMethod? Method { get; init; }
    /// <summary>When given, overrides <c>options.threshold</c>.</summary>
    [JsonPropertyName("threshold")] public float? Threshold { get; init; }

    /// <summary>The model descriptor's surface classes (not stored in the profile): they mark regions on a surface.</summary>
    [JsonIgnore]
    public IReadOnlyList<int>? DescriptorSurfaceClasses { get; init; }

    /// <summary>The options frames are scored with: <see cref="Options"/> with the top-level shorthands applied.</summary>
    [JsonIgnore]
    public ScoringOptions Effective => Options with
    {
        Method = Method ?? Options.Method,
        Threshold = Threshold ?? Options.Threshold,
        MarkedSurfaceClasses = DescriptorSurfaceClasses,
    };

    /// <summary>This profile knowing which of the model's classes its descriptor marks <c>surface</c>.</summary>
    public ScoringProfile WithSurfacesOf(Models.ModelDescriptor? descriptor)
    {
        if (descriptor is null) return this;
        var surface = new List<int>();
        for (int i = 0; i < descriptor.Classes.Count; i++)
            if (descriptor.Classes[i].Surface) surface.Add(i);
        return this with { DescriptorSurfaceClasses = surface.Count == 0 ? null : surface };
    }

    /// <summary>The same profile with the shorthands folded into <see cref="Options"/> and repeated at the top level.</summary>
    public ScoringProfile Normalized()
    {
        var effective = Effective;
        return this with { Options = effective, Method = effective.Method, Threshold = effective.Threshold };
    }

    public static ScoringProfile Default { get; } = new ScoringProfile().Normalized();

    public static readonly JsonSerializerOptions JsonOptions = new(JsonSerializerDefaults.Web)
    {
        WriteIndented = true,
        DefaultIgnoreCondition = JsonIgnoreCondition.WhenWritingNull,
        // A misspelt option must not silently fall back to its default.
        UnmappedMemberHandling = JsonUnmappedMemberHandling.Disallow,
        ReadCommentHandling = JsonCommentHandling.Skip,
        AllowTrailingCommas = true,
    };

    /// <summary>A version string for a profile saved now: its UTC time, sortable.</summary>
    public static string VersionAt(DateTimeOffset utc) => utc.UtcDateTime.ToString("yyyyMMdd'T'HHmmss'Z'", System.Globalization.CultureInfo.InvariantCulture);

    /// <summary>The profile in <paramref name="modelFolder"/>, or the defaults when it has none.</summary>
    public static ScoringProfile LoadOrDefault(string modelFolder)
    {
        string path = Path.Combine(modelFolder, FileName);
        if (!File.Exists(path)) return Default;
        using var stream = File.OpenRead(path);
        return Read(stream, path);
    }

    public static ScoringProfile Read(Stream stream, string source = FileName)
    {
        ScoringProfile? profile;
        try
        {
            profile = JsonSerializer.Deserialize<ScoringProfile>(stream, JsonOptions);
        }
        catch (JsonException e)
        {
            throw new ScoringInputException(ScoringErrorCodes.Options, $"{source} is not a valid scoring profile: {e.Message}");
        }
        if (profile is null)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"{source} is empty.");
        if (string.IsNullOrWhiteSpace(profile.Version))
            throw new ScoringInputException(ScoringErrorCodes.Options, $"{source} has no 'version'.");
        profile.Effective.Validate();
        return profile.Normalized();
    }

    /// <summary>Writes next to the model through a temporary file, so a reader never sees half a profile.</summary>
    public void Save(string modelFolder)
    {
        Effective.Validate();
        string path = Path.Combine(modelFolder, FileName);
        string temp = path + "." + Guid.NewGuid().ToString("N") + ".tmp";
        try
        {
            using (var stream = new FileStream(temp, FileMode.CreateNew, FileAccess.Write))
            {
                JsonSerializer.Serialize(stream, Normalized(), JsonOptions);
                stream.Flush(flushToDisk: true);
            }
            File.Move(temp, path, overwrite: true);
        }
        finally
        {
            if (File.Exists(temp)) File.Delete(temp);
        }
    }
}
