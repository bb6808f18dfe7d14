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

    /// <summary>Versions name a profile in every report: letters, digits, '.', '_', '-', ':' and '+' (ISO times fit), 1 to 64 characters.</summary>
    public static readonly System.Text.RegularExpressions.Regex VersionPattern = new("^[A-Za-z0-9][A-Za-z0-9._:+-]{0,63}$",
        System.Text.RegularExpressions.RegexOptions.CultureInvariant);
    public const int MaxNoteLength = 2000;

    private static void CheckVersion(string version, string source)
    {
        if (!VersionPattern.IsMatch(version))
            throw new ScoringInputException(ScoringErrorCodes.Options,
                $"{source}: 'version' must be 1 to 64 letters, digits, '.', '_', '-', ':' or '+', starting with a letter or digit; " +
                $"got {(version.Length > 80 ? $"{version.Length} characters" : $"'{version}'")}.");
    }

    /// <summary>
    /// A profile sent to replace the stored one. A replacement states what it sets: <c>options</c> must carry every
    /// setting a stored profile carries (as <c>GET /v1/models/{model}</c> shows them), so an empty or partial body
    /// never silently resets a tuned setting to its default; the top-level <c>method</c>/<c>threshold</c>
    /// shorthands may be repeated only with the same value as in <c>options</c>.
    /// </summary>
    public static ScoringProfile ReadReplacement(byte[] body, string source)
    {
        System.Text.Json.Nodes.JsonNode? node;
        try
        {
            node = System.Text.Json.Nodes.JsonNode.Parse(body, documentOptions: new JsonDocumentOptions
            {
                CommentHandling = JsonCommentHandling.Skip, AllowTrailingCommas = true, MaxDepth = 16,
                // A key given twice would otherwise surface as a runtime error when the tree is walked.
                AllowDuplicateProperties = false,
            });
        }
        catch (JsonException e)
        {
            throw new ScoringInputException(ScoringErrorCodes.Options, $"{source} is not a valid scoring profile: {e.Message}");
        }
        if (node is not System.Text.Json.Nodes.JsonObject root)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"{source} must be a JSON object holding 'options'.");
        // Unknown members and invalid values first: they name the exact mistake.
        var profile = Read(new MemoryStream(body, writable: false), source);
        if (Member(root, "options") is not System.Text.Json.Nodes.JsonObject options)
            throw new ScoringInputException(ScoringErrorCodes.Options,
                $"{source} must state 'options' as an object with every scoring setting; a profile is replaced whole, never merged.");
        var missing = new List<string>();
        MissingMembers(RequiredOptions, options, "options", missing);
        if (missing.Count > 0)
            throw new ScoringInputException(ScoringErrorCodes.Options,
                $"{source} leaves out {string.Join(", ", missing)}; a profile is replaced whole, so state every setting " +
                "(GET /v1/models/{model} shows the current ones).");

        // Read folded the shorthands in; compare what was sent.
        var sent = JsonSerializer.Deserialize<ScoringProfile>(body, JsonOptions)!;
        if (sent.Method is { } m && m != sent.Options.Method)
            throw new ScoringInputException(ScoringErrorCodes.Options,
                $"{source} says method '{m.ToString().ToLowerInvariant()}' at the top level but '{sent.Options.Method.ToString().ToLowerInvariant()}' in options; give one value.");
        if (sent.Threshold is { } t && t != sent.Options.Threshold)
            throw new ScoringInputException(ScoringErrorCodes.Options,
                $"{source} says threshold {t} at the top level but {sent.Options.Threshold} in options; give one value.");
        return profile;
    }

    /// <summary>The members a stored profile's options always carry (the defaults, written the way profiles are).</summary>
    private static readonly System.Text.Json.Nodes.JsonObject RequiredOptions =
        JsonSerializer.SerializeToNode(new ScoringOptions(), JsonOptions)!.AsObject();

    private static System.Text.Json.Nodes.JsonNode? Member(System.Text.Json.Nodes.JsonObject o, string name)
    {
        foreach (var (key, value) in o)
            if (string.Equals(key, name, StringComparison.OrdinalIgnoreCase)) return value;
        return null;
    }

    private static void MissingMembers(System.Text.Json.Nodes.JsonObject required, System.Text.Json.Nodes.JsonObject given, string path, List<string> missing)
    {
        foreach (var (key, value) in required)
        {
            var member = Member(given, key);
            if (member is null) missing.Add($"{path}.{key}");
            else if (value is System.Text.Json.Nodes.JsonObject inner && member is System.Text.Json.Nodes.JsonObject givenInner)
                MissingMembers(inner, givenInner, $"{path}.{key}", missing);
        }
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
        if (profile.Options is null)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"{source}: 'options' must be an object of scoring settings, not null.");
        if (string.IsNullOrWhiteSpace(profile.Version))
            throw new ScoringInputException(ScoringErrorCodes.Options, $"{source} has no 'version'.");
        CheckVersion(profile.Version, source);
        if (profile.Note is { Length: > MaxNoteLength })
            throw new ScoringInputException(ScoringErrorCodes.Options, $"{source}: 'note' has {profile.Note.Length} characters; at most {MaxNoteLength} are kept.");
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
