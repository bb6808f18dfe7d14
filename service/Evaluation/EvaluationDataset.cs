using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Advanced;
using SixLabors.ImageSharp.Formats.Jpeg;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.Formats.Webp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Logits;

namespace Strayspot.Service.Evaluation;

/// <summary>Stable codes of dataset refusals (raised as <see cref="ScoringInputException"/>).</summary>
public static class DatasetErrorCodes
{
    /// <summary>The dataset folder does not exist.</summary>
    public const string Missing = "dataset-missing";
    /// <summary>The folder holds no frame with a mask.</summary>
    public const string Empty = "dataset-empty";
    /// <summary>One or more files are missing, unreadable or do not fit together; the message lists them all.</summary>
    public const string Invalid = "dataset-invalid";
}

/// <summary>One evaluated frame: its id (the matching stem), frame, anomaly mask and optional class label map.</summary>
public sealed record DatasetItem(string Id, string FramePath, string MaskPath, string? LabelsPath);

/// <summary>
/// A folder of frames with ground-truth anomaly masks (8-bit grayscale PNG: 0 in-distribution, 1 anomaly, 255 ignore)
/// and, optionally, class label maps (grayscale PNG, value = class index, 255 = unlabelled). Two layouts, matched by
/// file stem:
/// <list type="bullet">
/// <item><b>split</b> (used when a <c>frames/</c> subfolder exists): <c>frames/&lt;id&gt;.png|jpg|jpeg|webp</c>,
/// <c>masks/&lt;id&gt;.png</c>, optional <c>labels/&lt;id&gt;.png</c>;</item>
/// <item><b>flat</b> (otherwise; the demo's held-out set): <c>frame_&lt;id&gt;.png|jpg|jpeg|webp</c>,
/// <c>mask_&lt;id&gt;.png</c>, optional <c>labels_&lt;id&gt;.png</c>, all in the folder itself.</item>
/// </list>
/// Opening checks every file before any frame is scored (frame without mask, mask without frame, two frames with one
/// id, unreadable file, size mismatch, mask value other than 0/1/255, label value out of range) and refuses the whole
/// set with ONE error listing every problem per file.
/// </summary>
public sealed class EvaluationDataset
{
    public const string FramesFolder = "frames", MasksFolder = "masks", LabelsFolder = "labels";
    public const string FramePrefix = "frame_", MaskPrefix = "mask_", LabelsPrefix = "labels_";
    private static readonly string[] FrameExtensions = [".png", ".jpg", ".jpeg", ".webp"];
    private static readonly Configuration Formats = new(new PngConfigurationModule(), new JpegConfigurationModule(), new WebpConfigurationModule());
    private const int MaxListed = 50;

    private EvaluationDataset(string root, string layout, IReadOnlyList<DatasetItem> items)
    {
        Root = root;
        Layout = layout;
        Items = items;
    }

    public string Root { get; }
    /// <summary>"split" or "flat".</summary>
    public string Layout { get; }
    public IReadOnlyList<DatasetItem> Items { get; }
    public string Name => Path.GetFileName(Path.TrimEndingDirectorySeparator(Root));
    /// <summary>True when every frame has a class label map (a partial set is refused at opening).</summary>
    public bool HasLabels => Items.Count > 0 && Items[0].LabelsPath is not null;

    /// <summary>Finds, matches and checks the dataset's files.</summary>
    /// <param name="classCount">When given, label map values must be below it or 255.</param>
    /// <exception cref="ScoringInputException">With a <see cref="DatasetErrorCodes"/> code; the message lists every problem.</exception>
    public static EvaluationDataset Open(string folder, int? classCount = null)
    {
        string root = Path.GetFullPath(folder);
        if (!Directory.Exists(root))
            throw new ScoringInputException(DatasetErrorCodes.Missing, $"Dataset folder '{folder}' does not exist.");
        var problems = new List<string>();
        bool split = Directory.Exists(Path.Combine(root, FramesFolder));
        var items = split ? MatchSplit(root, problems) : MatchFlat(root, problems);
        if (items.Count == 0 && problems.Count == 0)
            throw new ScoringInputException(DatasetErrorCodes.Empty,
                $"Dataset folder '{folder}' holds no frames with masks. Expected either {FramesFolder}/<id>.png|jpg + {MasksFolder}/<id>.png, " +
                $"or {FramePrefix}<id>.png|jpg + {MaskPrefix}<id>.png side by side.");
        int labelled = items.Count(i => i.LabelsPath is not null);
        if (labelled > 0 && labelled < items.Count)
            foreach (var i in items.Where(i => i.LabelsPath is null))
                problems.Add($"{Rel(root, i.FramePath)}: no class label map, but {labelled} other frame(s) have one (give all or none)");
        foreach (var item in items) Check(root, item, classCount, problems);
        if (problems.Count > 0)
        {
            var shown = problems.Take(MaxListed).Select(p => "  - " + p);
            string more = problems.Count > MaxListed ? $"{Environment.NewLine}  … and {problems.Count - MaxListed} more" : "";
            throw new ScoringInputException(DatasetErrorCodes.Invalid,
                $"Dataset '{folder}' ({(split ? "split" : "flat")} layout) has {problems.Count} problem(s):{Environment.NewLine}" +
                string.Join(Environment.NewLine, shown) + more);
        }
        return new EvaluationDataset(root, split ? "split" : "flat", items);
    }

    private static List<DatasetItem> MatchSplit(string root, List<string> problems)
    {
        var frames = Stems(Path.Combine(root, FramesFolder), "", FrameExtensions, root, problems);
        var masks = Stems(Path.Combine(root, MasksFolder), "", [".png"], root, problems);
        var labels = Directory.Exists(Path.Combine(root, LabelsFolder))
            ? Stems(Path.Combine(root, LabelsFolder), "", [".png"], root, problems) : [];
        return Match(root, frames, masks, labels, problems);
    }

    private static List<DatasetItem> MatchFlat(string root, List<string> problems)
    {
        var frames = Stems(root, FramePrefix, FrameExtensions, root, problems);
        var masks = Stems(root, MaskPrefix, [".png"], root, problems);
        var labels = Stems(root, LabelsPrefix, [".png"], root, problems);
        return Match(root, frames, masks, labels, problems);
    }

    /// <summary>Files named &lt;prefix&gt;&lt;id&gt;&lt;ext&gt; by id; two files with one id are a problem.</summary>
    private static SortedDictionary<string, string> Stems(string folder, string prefix, string[] extensions, string root, List<string> problems)
    {
        var byId = new SortedDictionary<string, string>(StringComparer.Ordinal);
        if (!Directory.Exists(folder)) return byId;
        foreach (string file in Directory.EnumerateFiles(folder).Order(StringComparer.Ordinal))
        {
            string name = Path.GetFileName(file);
            if (!name.StartsWith(prefix, StringComparison.Ordinal)) continue;
            if (!extensions.Contains(Path.GetExtension(name).ToLowerInvariant())) continue;
            string id = Path.GetFileNameWithoutExtension(name)[prefix.Length..];
            if (id.Length == 0) continue;
            if (byId.TryGetValue(id, out string? first))
                problems.Add($"{Rel(root, file)}: same id '{id}' as {Rel(root, first)}");
            else byId[id] = file;
        }
        return byId;
    }

    private static List<DatasetItem> Match(string root, SortedDictionary<string, string> frames, SortedDictionary<string, string> masks,
        SortedDictionary<string, string> labels, List<string> problems)
    {
        var items = new List<DatasetItem>();
        foreach (var (id, frame) in frames)
        {
            if (!masks.TryGetValue(id, out string? mask))
            {
                problems.Add($"{Rel(root, frame)}: no mask (expected {ExpectedMask(root, frame, id)})");
                continue;
            }
            items.Add(new DatasetItem(id, frame, mask, labels.GetValueOrDefault(id)));
        }
        // A mask named <frame id>_<suffix> is a second map for a known frame (often a class label map put beside the
        // masks): one line saying where it goes, instead of one "no frame" line per file.
        var extra = new List<string>();
        foreach (var (id, mask) in masks)
        {
            if (frames.ContainsKey(id)) continue;
            int cut = id.LastIndexOf('_');
            if (cut > 0 && frames.ContainsKey(id[..cut])) extra.Add(Rel(root, mask));
            else problems.Add($"{Rel(root, mask)}: no frame with id '{id}'");
        }
        if (extra.Count > 0)
        {
            bool splitLayout = masks.Values.Any(m => Path.GetDirectoryName(m) != root);
            problems.Add($"{extra.Count} file(s) like {extra[0]} are named after a frame with a suffix: a mask must be named exactly like its frame. " +
                (splitLayout
                    ? $"Class label maps go in {LabelsFolder}/<id>.png (value = class index, 255 = unlabelled)."
                    : $"Class label maps go beside the frames as {LabelsPrefix}<id>.png (value = class index, 255 = unlabelled)."));
        }
        foreach (var (id, label) in labels)
            if (!frames.ContainsKey(id)) problems.Add($"{Rel(root, label)}: no frame with id '{id}'");
        return items;
    }

    private static string ExpectedMask(string root, string frame, string id) =>
        Path.GetDirectoryName(frame) == root ? $"{MaskPrefix}{id}.png" : $"{MasksFolder}/{id}.png";

    private static void Check(string root, DatasetItem item, int? classCount, List<string> problems)
    {
        var frameSize = Identify(root, item.FramePath, problems);
        var mask = ReadGray(root, item.MaskPath, problems);
        if (mask is not null)
        {
            if (frameSize is { } f && (f.Width != mask.Value.Width || f.Height != mask.Value.Height))
                problems.Add($"{Rel(root, item.MaskPath)}: {mask.Value.Width}×{mask.Value.Height}, but its frame is {f.Width}×{f.Height}");
            else if (FirstBad(mask.Value.Values, v => v is 0 or 1 or 255) is (int at, int value))
                problems.Add($"{Rel(root, item.MaskPath)}: value {value} at x={at % mask.Value.Width}, y={at / mask.Value.Width} " +
                             "(masks hold 0 in-distribution, 1 anomaly, 255 ignore)");
        }
        if (item.LabelsPath is null) return;
        var labels = ReadGray(root, item.LabelsPath, problems);
        if (labels is null) return;
        if (frameSize is { } s && (s.Width != labels.Value.Width || s.Height != labels.Value.Height))
            problems.Add($"{Rel(root, item.LabelsPath)}: {labels.Value.Width}×{labels.Value.Height}, but its frame is {s.Width}×{s.Height}");
        else if (classCount is int c && FirstBad(labels.Value.Values, v => v < c || v == 255) is (int at, int value))
            problems.Add($"{Rel(root, item.LabelsPath)}: class {value} at x={at % labels.Value.Width}, y={at / labels.Value.Width} " +
                         $"(the model has classes 0..{c - 1}; 255 = unlabelled)");
    }

    private static (int At, int Value)? FirstBad(byte[] values, Func<int, bool> ok)
    {
        for (int i = 0; i < values.Length; i++)
            if (!ok(values[i])) return (i, values[i]);
        return null;
    }

    private static (int Width, int Height)? Identify(string root, string path, List<string> problems)
    {
        try
        {
            using var stream = File.OpenRead(path);
            var info = Image.Identify(Formats, stream, out _);
            if (info is null)
            {
                problems.Add($"{Rel(root, path)}: not a PNG, JPEG or WebP image");
                return null;
            }
            return (info.Width, info.Height);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or ImageFormatException or InvalidImageContentException)
        {
            problems.Add($"{Rel(root, path)}: unreadable ({e.Message})");
            return null;
        }
    }

    /// <summary>An 8-bit grayscale PNG's values; other colour types are refused (their values would be a colour conversion).</summary>
    public static (byte[] Values, int Width, int Height)? ReadGray(string root, string path, List<string> problems)
    {
        try
        {
            using var stream = File.OpenRead(path);
            var info = Image.Identify(Formats, stream, out var format);
            if (info is null || format is not PngFormat)
            {
                problems.Add($"{Rel(root, path)}: not a PNG");
                return null;
            }
            var png = info.Metadata.GetPngMetadata();
            if (png.ColorType != PngColorType.Grayscale || (png.BitDepth ?? PngBitDepth.Bit8) != PngBitDepth.Bit8)
            {
                problems.Add($"{Rel(root, path)}: a {png.ColorType} {png.BitDepth} PNG; save it as 8-bit grayscale (one value per pixel)");
                return null;
            }
            stream.Position = 0;
            using var image = Image.Load<L8>(Formats, stream);
            var values = new byte[image.Width * image.Height];
            image.CopyPixelDataTo(values);
            return (values, image.Width, image.Height);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or ImageFormatException or InvalidImageContentException)
        {
            problems.Add($"{Rel(root, path)}: unreadable ({e.Message})");
            return null;
        }
    }

    /// <summary>Reads a checked mask or label map again during the run.</summary>
    public static byte[] ReadChecked(string path)
    {
        var problems = new List<string>();
        var read = ReadGray(Path.GetDirectoryName(path)!, path, problems);
        if (read is null)
            throw new ScoringInputException(DatasetErrorCodes.Invalid, $"{path} changed during the evaluation: {string.Join("; ", problems)}");
        return read.Value.Values;
    }

    private static string Rel(string root, string path) => Path.GetRelativePath(root, path);
}
