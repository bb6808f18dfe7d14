using Strayspot.Service.Models;

namespace Strayspot.Service.Rendering;

/// <summary>
/// Which artifacts a frame gets, as <c>score --artifacts</c> and a batch's <c>artifacts</c> field say it: a comma
/// list of <see cref="ArtifactWriter.All"/> names, <c>all</c> or <c>none</c>; the frame report is always written.
/// </summary>
public static class ArtifactChoice
{
    /// <summary>The default: the mask and the picture a person looks at. The full-size maps (class map, heat map,
    /// score NPY and 16-bit PNG) are opt-in: at 1920×1080 all of them take about 14 MB a frame.</summary>
    public static readonly IReadOnlyList<string> Lean = ["mask", "overlay"];

    public static readonly string Vocabulary = $"a comma list of {string.Join(", ", ArtifactWriter.All)}, or 'all' or 'none'";

    /// <summary>The chosen artifacts (<see cref="Lean"/> for null), or null with <paramref name="error"/> naming the closest real name.</summary>
    public static IReadOnlyList<string>? Parse(string? text, out string? error)
    {
        error = null;
        if (text is null) return Lean;
        string t = text.Trim().ToLowerInvariant();
        if (t == "none") return [];
        if (t == "all") return ArtifactWriter.All;
        var names = t.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);
        foreach (string n in names)
            if (!ArtifactWriter.All.Contains(n))
            {
                string? near = NearestName.Find(n, ArtifactWriter.All);
                error = $"'{n}' is no artifact.{(near is not null ? $" Did you mean '{near}'?" : "")} Give {Vocabulary}.";
                return null;
            }
        return names.Distinct().ToList();
    }

    /// <summary>The stored form: the names joined by commas, in <see cref="ArtifactWriter.All"/>'s order (empty for none).</summary>
    public static string Format(IReadOnlyList<string> artifacts) => string.Join(",", ArtifactWriter.All.Where(artifacts.Contains));

    /// <summary>The stored form read back; null (a batch from before artifacts were chosen) means every artifact.</summary>
    public static IReadOnlyList<string> Read(string? stored) =>
        stored is null ? ArtifactWriter.All : stored.Split(',', StringSplitOptions.RemoveEmptyEntries);
}
