using System.Globalization;
using Microsoft.Extensions.Primitives;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Hosting;

namespace Strayspot.Service.Api;

/// <summary>Who sent a frame and when: copied into the frame report, never interpreted.</summary>
public sealed record FrameMetadata(string? ClientFrameId, DateTimeOffset? CaptureTime, string? RigId);

/// <summary>The form fields of a logits upload after checking, with the profile's options overridden.</summary>
public sealed record LogitsRequest(
    ScoringOptions Options,
    int? FrameWidth,
    int? FrameHeight,
    FrameMetadata Metadata,
    IReadOnlyList<string> Artifacts,
    bool Inline = false,
    bool Stretch = false);

/// <summary>
/// Reads the text fields of a scoring upload, logits or camera image alike. Every field is checked and every problem is reported at once;
/// an unknown field is an error, so a misspelt option never silently falls back to the profile.
/// </summary>
public static class ScoringForm
{
    public const string LogitsPart = "logits";
    public static readonly string[] DefaultArtifacts = ["classes", "mask", "heat"];
    private const int MaxTextLength = 128;

    public static readonly IReadOnlyList<string> Fields =
    [
        "frameWidth", "frameHeight", "method", "threshold", "minArea", "boundarySuppression", "smoothing",
        "clientFrameId", "captureTime", "rigId", "artifacts", "response", "stretch",
    ];

    /// <summary>The text fields an upload with file part <paramref name="filePart"/> takes: an image already has its size.</summary>
    public static IReadOnlyList<string> FieldsFor(string filePart) =>
        filePart == LogitsPart ? Fields : Fields.Where(f => f is not ("frameWidth" or "frameHeight" or "stretch")).ToList();

    /// <summary>The checked request, or the errors by field name.</summary>
    public static (LogitsRequest? Request, Dictionary<string, string[]> Errors) Parse(
        IFormCollection form, ScoringOptions profile, long maxPixels, IReadOnlySet<string>? availableArtifacts = null,
        string filePart = LogitsPart, string fileDescription = "float32 NPY logits")
    {
        var errors = new Dictionary<string, string[]>(StringComparer.Ordinal);
        void Fail(string field, string message) => errors[field] = [message];

        foreach (var (field, messages) in UploadForm.Check(form, filePart, fileDescription, FieldsFor(filePart), requireFile: false))
            errors[field] = messages;

        string? Single(string field)
        {
            if (!form.TryGetValue(field, out StringValues v) || v.Count == 0) return null;
            if (v.Count > 1) return null; // refused by UploadForm.Check
            string s = v[0]!.Trim();
            return s.Length == 0 ? null : s;
        }

        int? width = PositiveInt(Single("frameWidth"), "frameWidth", Fail);
        int? height = PositiveInt(Single("frameHeight"), "frameHeight", Fail);
        if (width.HasValue != height.HasValue && !errors.ContainsKey("frameWidth") && !errors.ContainsKey("frameHeight"))
            Fail(width.HasValue ? "frameHeight" : "frameWidth", "Give frameWidth and frameHeight together, or neither (the logits' own size is used).");
        if (width is int w && height is int h && (long)w * h > maxPixels)
            Fail("frameWidth", $"A frame of {w}×{h} = {(long)w * h} pixels is larger than the service accepts ({maxPixels}, Service:MaxPixels).");

        var options = profile;
        if (Single("method") is string method)
        {
            if (ParseMethod(method) is ScoreMethod m) options = options with { Method = m };
            else Fail("method", $"Method '{method}' is unknown; use one of {ScoringMethods.Names}.");
        }
        if (Single("threshold") is string threshold)
        {
            if (float.TryParse(threshold, NumberStyles.Float, CultureInfo.InvariantCulture, out float t) && float.IsFinite(t))
                options = options with { Threshold = t };
            else Fail("threshold", $"Threshold '{threshold}' is not a finite number.");
        }
        if (PositiveInt(Single("minArea"), "minArea", Fail) is int area)
            options = options with { MinimumRegionArea = area };
        if (Switch(Single("boundarySuppression"), "boundarySuppression", Fail) is bool boundary)
            options = options with { BoundarySuppression = options.BoundarySuppression with { Enabled = boundary } };
        if (Switch(Single("smoothing"), "smoothing", Fail) is bool smoothing)
            options = options with { Smoothing = options.Smoothing with { Enabled = smoothing } };

        string? clientFrameId = Text(Single("clientFrameId"), "clientFrameId", Fail);
        string? rigId = Text(Single("rigId"), "rigId", Fail);
        DateTimeOffset? captureTime = null;
        if (Single("captureTime") is string ct)
        {
            if (DateTimeOffset.TryParse(ct, CultureInfo.InvariantCulture, DateTimeStyles.AssumeUniversal, out var when))
                captureTime = when;
            else Fail("captureTime", $"captureTime '{ct}' is not an ISO 8601 date and time (e.g. 2026-12-01T08:30:00Z).");
        }

        var artifacts = DefaultArtifacts.ToList();
        if (Single("artifacts") is string list)
        {
            var allowed = availableArtifacts ?? ArtifactStore.Files.Keys.ToHashSet();
            artifacts = list switch
            {
                "none" => [],
                // As score --artifacts and batches take it: every artifact this endpoint can make.
                "all" => Rendering.ArtifactWriter.All.Where(allowed.Contains).ToList(),
                _ => list.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries).Distinct().ToList(),
            };
            var unknown = artifacts.Where(a => !allowed.Contains(a)).ToList();
            if (unknown.Count > 0)
                Fail("artifacts", $"Artifact(s) {string.Join(", ", unknown)} cannot be made here; choose from {string.Join(", ", allowed.Order())}, or 'all' or 'none'.");
        }

        bool stretch = Switch(Single("stretch"), "stretch", Fail) ?? false;

        bool inline = false;
        if (Single("response") is string response)
        {
            if (response is "inline") inline = true;
            else if (response is not "links") Fail("response", $"response '{response}' must be 'links' (artifacts as URLs, the default) or 'inline' (one multipart/mixed answer).");
        }

        if (errors.Count == 0)
        {
            try { options.Validate(); }
            catch (Strayspot.Scoring.Logits.ScoringInputException e) { Fail("options", e.Message); }
        }
        if (errors.Count > 0) return (null, errors);
        return (new LogitsRequest(options, width, height, new FrameMetadata(clientFrameId, captureTime, rigId), artifacts, inline, stretch), errors);
    }

    public static ScoreMethod? ParseMethod(string s) => ScoringMethods.TryParse(s, cliAliases: false, out var method) ? method : null;

    private static int? PositiveInt(string? s, string field, Action<string, string> fail)
    {
        if (s is null) return null;
        if (int.TryParse(s, NumberStyles.None, CultureInfo.InvariantCulture, out int v) && v >= 1) return v;
        fail(field, $"{field} '{s}' must be a whole number of at least 1.");
        return null;
    }

    private static bool? Switch(string? s, string field, Action<string, string> fail)
    {
        switch (s?.ToLowerInvariant())
        {
            case null: return null;
            case "on" or "true" or "1": return true;
            case "off" or "false" or "0": return false;
            default:
                fail(field, $"{field} '{s}' must be on or off.");
                return null;
        }
    }

    private static string? Text(string? s, string field, Action<string, string> fail)
    {
        if (s is null) return null;
        if (s.Length > MaxTextLength || s.Any(char.IsControl))
        {
            fail(field, $"{field} must be at most {MaxTextLength} printable characters.");
            return null;
        }
        return s;
    }
}
