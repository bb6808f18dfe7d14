using Strayspot.Service.Rendering;
using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Regions;
using Strayspot.Service.Reports;
using Strayspot.Service.Review;

namespace Strayspot.Service.Batches;

/// <summary>
/// One region in a manifest line; <see cref="Outline"/> is the outer boundary, at most <see cref="Manifest.MaxOutlinePoints"/> points.
/// <see cref="ClassBeneath"/> is the class index and <see cref="ClassBeneathName"/> its name, as in the frame report
/// (−1 with the name for regions stored before the index was kept).
/// On a recording's frame line <see cref="Track"/> is the track the region joined (a decision on that track shows on it).
/// </summary>
public sealed record ManifestRegion(
    [property: JsonPropertyName("id")] int Id,
    [property: JsonPropertyName("box")] BoxReport Box,
    [property: JsonPropertyName("area")] long Area,
    [property: JsonPropertyName("meanScore")] float MeanScore,
    [property: JsonPropertyName("maxScore")] float MaxScore,
    [property: JsonPropertyName("classBeneath")] int ClassBeneath,
    [property: JsonPropertyName("classBeneathName")] string? ClassBeneathName,
    [property: JsonPropertyName("onSurface")] bool OnSurface,
    [property: JsonPropertyName("outline")] int[][] Outline,
    [property: JsonPropertyName("decision")] DecisionMark? Decision = null,
    [property: JsonPropertyName("track")] int? Track = null)
{
    /// <summary>What the region index keeps and the review tallies by: the class's name (its index when the model names none).</summary>
    [JsonIgnore]
    public string IndexedClass => ClassBeneathName ?? ClassBeneath.ToString(System.Globalization.CultureInfo.InvariantCulture);
}

/// <summary>
/// One line of the manifest: a frame, its score, regions and output files (relative to the batch folder).
/// <see cref="Kind"/> says what the line is: a <c>frame</c> (an image), a <c>recording</c> (a video, its regions its
/// kept tracks, <see cref="Timeline"/> its tracks' spans and ranked segments) or a <c>recording-frame</c> (one sampled
/// frame of the <see cref="Recording"/> whose line shares its <see cref="Seq"/>, at <see cref="TimeSeconds"/>).
/// <see cref="Warnings"/> repeats the report's warnings where there are any: a frame's from its report.json, a
/// recording's once on its own line from tracks.json (one recording, one frame size); absent when there are none.
/// </summary>
public sealed record ManifestLine(
    [property: JsonPropertyName("seq")] int Seq,
    [property: JsonPropertyName("frameId")] string FrameId,
    [property: JsonPropertyName("source")] string Source,
    [property: JsonPropertyName("frameScore")] float? FrameScore,
    [property: JsonPropertyName("regions")] IReadOnlyList<ManifestRegion> Regions,
    [property: JsonPropertyName("artifacts")] IReadOnlyDictionary<string, string>? Artifacts,
    [property: JsonPropertyName("model")] string Model,
    [property: JsonPropertyName("modelSha256")] string? ModelSha256,
    [property: JsonPropertyName("profileVersion")] string? ProfileVersion,
    [property: JsonPropertyName("error")] string? Error = null,
    [property: JsonPropertyName("decision")] DecisionMark? Decision = null,
    [property: JsonPropertyName("kind")] string Kind = ManifestKinds.Frame,
    [property: JsonPropertyName("recording")] string? Recording = null,
    [property: JsonPropertyName("index")] long? Index = null,
    [property: JsonPropertyName("timeSeconds")] double? TimeSeconds = null,
    [property: JsonPropertyName("segment")] int? Segment = null,
    [property: JsonPropertyName("timeline")] RecordingTimeline? Timeline = null,
    [property: JsonPropertyName("warnings")] IReadOnlyList<ReportWarning>? Warnings = null);

/// <summary>What a manifest line stands for.</summary>
public static class ManifestKinds
{
    public const string Frame = "frame";
    public const string Recording = "recording";
    public const string RecordingFrame = "recording-frame";
}

/// <summary>
/// The batch manifest: JSON lines, one per frame, highest frame score first; frames that failed come last with
/// their error. A recording ranks by its line (its highest kept track's score), followed by one line per sampled
/// frame in time order (<see cref="BatchRecordings.Lines"/>). Review decisions ride along: the frame's own on the
/// line, each region's on the region. Built from the store and the recordings' files, so it can be rewritten at any time.
/// </summary>
public static class Manifest
{
    public const string FileName = "manifest.jsonl";
    public const string ContentType = "application/x-ndjson";
    public const int MaxOutlinePoints = 64;


    internal static readonly JsonSerializerOptions LineJson = new()
    {
        WriteIndented = false,
        DefaultIgnoreCondition = JsonIgnoreCondition.WhenWritingNull,
        NumberHandling = JsonNumberHandling.AllowNamedFloatingPointLiterals,
    };

    /// <summary>The regions of a scored frame with their outlines, while its maps are valid.</summary>
    public static List<ManifestRegion> Regions(FrameScoring scored, IReadOnlyList<string> classNames)
    {
        var set = scored.Regions;
        var list = new List<ManifestRegion>(set.Regions.Count);
        foreach (var r in set.Regions)
        {
            var outline = Simplify(RegionOutline.Outline(set, r.Id), MaxOutlinePoints);
            var points = new int[outline.Count][];
            for (int i = 0; i < outline.Count; i++) points[i] = [outline[i].X, outline[i].Y];
            string? beneath = r.MajorityClass < classNames.Count ? classNames[r.MajorityClass] : null;
            list.Add(new ManifestRegion(r.Id, new BoxReport(r.Left, r.Top, r.Width, r.Height), r.Area, r.MeanScore, r.MaxScore,
                r.MajorityClass, beneath, r.OnSurface, points));
        }
        return list;
    }

    /// <summary>
    /// Drops points where the boundary runs straight on (same step as before), then, if still too many, keeps evenly
    /// spaced ones: the first point is always kept and the order stays clockwise.
    /// </summary>
    public static List<(int X, int Y)> Simplify(IReadOnlyList<(int X, int Y)> outline, int maxPoints)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(maxPoints, 3);
        int n = outline.Count;
        if (n <= 3) return outline.ToList();
        var corners = new List<(int X, int Y)>(n) { outline[0] };
        for (int i = 1; i < n; i++)
        {
            var prev = outline[i - 1];
            var cur = outline[i];
            var next = outline[(i + 1) % n];
            bool straight = cur.X - prev.X == next.X - cur.X && cur.Y - prev.Y == next.Y - cur.Y;
            if (!straight) corners.Add(cur);
        }
        if (corners.Count <= maxPoints) return corners;
        var kept = new List<(int X, int Y)>(maxPoints);
        for (int i = 0; i < maxPoints; i++) kept.Add(corners[(int)((long)i * corners.Count / maxPoints)]);
        return kept;
    }

    public static string RegionsJson(IReadOnlyList<ManifestRegion> regions) => JsonSerializer.Serialize(regions, LineJson);

    public static List<ManifestRegion> ReadRegions(string? regionsJson) =>
        regionsJson is null ? [] : JsonSerializer.Deserialize<List<ManifestRegion>>(StoredBeforeClassIndex(regionsJson), LineJson) ?? [];

    /// <summary>Regions stored by older versions carry the class's name in <c>classBeneath</c>: it moves to <c>classBeneathName</c>, the index is −1.</summary>
    private static string StoredBeforeClassIndex(string regionsJson)
    {
        if (!regionsJson.Contains("\"classBeneath\":\"", StringComparison.Ordinal)) return regionsJson;
        var regions = System.Text.Json.Nodes.JsonNode.Parse(regionsJson)!.AsArray();
        foreach (var node in regions)
        {
            if (node is not System.Text.Json.Nodes.JsonObject region || region["classBeneath"] is not System.Text.Json.Nodes.JsonValue v
                || !v.TryGetValue<string>(out string? name)) continue;
            region["classBeneath"] = -1;
            region["classBeneathName"] = name;
        }
        return regions.ToJsonString();
    }

    /// <summary>
    /// The lines of a batch in manifest order: done frames by score (highest first, then seq), failed frames after.
    /// With <paramref name="onlyVerdict"/>, just the done frames that carry that verdict on the frame or on a region.
    /// Lazy: a long recording's frame lines are read from its <c>frames.jsonl</c> as they are written out.
    /// </summary>
    public static IEnumerable<ManifestLine> Lines(string batchFolder, BatchRecord batch, IReadOnlyList<FrameRecord> frames,
        IReadOnlyList<Decision>? decisions = null, string? onlyVerdict = null)
    {
        var bySeq = new Dictionary<(int Seq, int? Region), Decision>();
        foreach (var d in decisions ?? []) bySeq[(d.Seq, d.Region)] = d;
        var done = frames.Where(f => f.State == FrameStates.Done)
            .OrderByDescending(f => f.FrameScore ?? float.NegativeInfinity).ThenBy(f => f.Seq);
        var failed = frames.Where(f => f.State == FrameStates.Failed).OrderBy(f => f.Seq);
        foreach (var f in done)
        {
            if (BatchRecordings.IsRecordingReport(f.ReportPath!))
            {
                foreach (var line in BatchRecordings.Lines(batchFolder, batch, f, (seq, region) => bySeq.GetValueOrDefault((seq, region)), onlyVerdict))
                    yield return line;
                continue;
            }
            var regions = ReadRegions(f.RegionsJson);
            bool keep = onlyVerdict is null;
            for (int i = 0; i < regions.Count; i++)
            {
                if (!bySeq.TryGetValue((f.Seq, regions[i].Id), out var rd)) continue;
                regions[i] = regions[i] with { Decision = DecisionMark.From(rd) };
                keep |= rd.Verdict == onlyVerdict;
            }
            var frameDecision = bySeq.GetValueOrDefault((f.Seq, null));
            keep |= frameDecision?.Verdict == onlyVerdict;
            if (!keep) continue;
            string folder = Path.GetDirectoryName(f.ReportPath!)!.Replace('\\', '/');
            var artifacts = new Dictionary<string, string>(StringComparer.Ordinal);
            // Only what the batch's frames were given (named as in reports and review routes), and the report.
            foreach (string name in batch.Artifacts) artifacts[name] = folder + "/" + ArtifactWriter.FileOf(name);
            artifacts[ArtifactWriter.Report] = folder + "/" + ArtifactWriter.ReportFile;
            yield return new ManifestLine(f.Seq, f.FrameId, f.SourcePath, f.FrameScore, regions, artifacts, batch.Model, batch.ModelSha256,
                batch.ProfileVersion, Decision: frameDecision is null ? null : DecisionMark.From(frameDecision),
                Warnings: WarningsOf(Path.Combine(batchFolder, f.ReportPath!)));
        }
        if (onlyVerdict is not null) yield break;
        foreach (var f in failed)
            yield return new ManifestLine(f.Seq, f.FrameId, f.SourcePath, null, [], null, batch.Model, batch.ModelSha256, batch.ProfileVersion, f.Error,
                Kind: Recordings.VideoRecording.IsVideoFile(f.SourcePath) ? ManifestKinds.Recording : ManifestKinds.Frame);
    }

    /// <summary>
    /// The <c>warnings</c> of a frame's report.json, read without building the rest of the report; null when it has
    /// none or cannot be read (the line then says no more than the store knows).
    /// </summary>
    internal static IReadOnlyList<ReportWarning>? WarningsOf(string reportPath)
    {
        try
        {
            var reader = new Utf8JsonReader(File.ReadAllBytes(reportPath));
            if (!reader.Read() || reader.TokenType != JsonTokenType.StartObject) return null;
            while (reader.Read() && reader.TokenType == JsonTokenType.PropertyName)
            {
                bool wanted = reader.ValueTextEquals("warnings"u8);
                reader.Read();
                if (!wanted) { reader.Skip(); continue; }
                return Any(JsonSerializer.Deserialize<List<ReportWarning>>(ref reader, LineJson));
            }
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or JsonException) { }
        return null;
    }

    /// <summary>A warnings list as a line carries it: null when empty, so a line without doubts has no field.</summary>
    internal static IReadOnlyList<ReportWarning>? Any(IReadOnlyList<ReportWarning>? warnings) => warnings is { Count: > 0 } ? warnings : null;

    /// <summary>Writes the lines as JSON lines; returns how many.</summary>
    public static int WriteTo(Stream stream, IEnumerable<ManifestLine> lines)
    {
        int count = 0;
        foreach (var line in lines)
        {
            JsonSerializer.Serialize(stream, line, LineJson);
            stream.WriteByte((byte)'\n');
            count++;
        }
        return count;
    }

    /// <summary>Writes the manifest of a batch, with its decisions, atomically into its folder; returns the path.</summary>
    public static string Write(string batchFolder, BatchRecord batch, IReadOnlyList<FrameRecord> frames, IReadOnlyList<Decision> decisions)
    {
        string path = Path.Combine(batchFolder, FileName);
        AtomicFile.Write(path, s => WriteTo(s, Lines(batchFolder, batch, frames, decisions)));
        return path;
    }
}
