using System.Globalization;
using System.Text.Json;
using System.Text.Json.Serialization;
using SixLabors.ImageSharp;
using Strayspot.Service.Models;

namespace Strayspot.Service.Calibration;

/// <summary>
/// What a calibration was measured through besides the weights: every preprocessing field, the output read and the
/// class names, plus the frame size most of its frames had. Statistics of other preprocessing would standardize with
/// the wrong means, so a calibration whose binding differs from the loaded descriptor is refused.
/// </summary>
public sealed record CalibrationBinding
{
    [JsonPropertyName("input")] public InputDescriptor Input { get; init; } = new();
    [JsonPropertyName("outputTensor")] public string OutputTensor { get; init; } = "";
    [JsonPropertyName("outputKind")] public string OutputKind { get; init; } = "";
    [JsonPropertyName("classNames")] public List<string> ClassNames { get; init; } = [];
    /// <summary>The most common frame size among the calibration frames; the profile's pixel parameters were tuned near it.</summary>
    [JsonPropertyName("frameSize")] public FrameSize? FrameSize { get; init; }

    public static CalibrationBinding Of(ModelDescriptor d, FrameSize? frameSize) => new()
    {
        Input = d.Input,
        OutputTensor = d.Output.Tensor,
        OutputKind = d.Output.Kind,
        ClassNames = d.Classes.Select(c => c.Name).ToList(),
        FrameSize = frameSize,
    };

    /// <summary>One line per field that differs from <paramref name="d"/>, e.g. <c>input.mean: [0, 0, 0] when calibrated, now [0.5, 0.5, 0.5]</c>.</summary>
    public IReadOnlyList<string> Differences(ModelDescriptor d)
    {
        var changes = new List<string>();
        void Check(string field, object? then, object? now)
        {
            string a = Show(then), b = Show(now);
            if (a != b) changes.Add($"{field}: {a} when calibrated, now {b}");
        }
        var i = Input ?? new InputDescriptor();
        Check("input.tensor", i.Tensor, d.Input.Tensor);
        Check("input.layout", i.Layout, d.Input.Layout);
        Check("input.channelOrder", i.ChannelOrder, d.Input.ChannelOrder);
        Check("input.valueScale", i.ValueScale, d.Input.ValueScale);
        Check("input.mean", i.Mean, d.Input.Mean);
        Check("input.std", i.Std, d.Input.Std);
        var s = i.Size ?? new SizePolicy();
        Check("input.size.mode", s.Mode, d.Input.Size.Mode);
        Check("input.size.height", s.Height, d.Input.Size.Height);
        Check("input.size.width", s.Width, d.Input.Size.Width);
        Check("input.size.resizeSide", s.ResizeSide, d.Input.Size.ResizeSide);
        Check("input.size.sideLength", s.SideLength, d.Input.Size.SideLength);
        Check("input.size.padMultiple", s.PadMultiple, d.Input.Size.PadMultiple);
        Check("output.tensor", OutputTensor, d.Output.Tensor);
        Check("output.kind", OutputKind, d.Output.Kind);
        var names = d.Classes.Select(c => c.Name).ToList();
        if (ClassNames.Count != names.Count) Check("classes", $"{ClassNames.Count} classes", $"{names.Count} classes");
        else
            for (int k = 0; k < names.Count; k++)
                Check($"classes[{k}].name", ClassNames[k], names[k]);
        return changes;
    }

    private static string Show(object? v) => v switch
    {
        null => "(none)",
        string s => $"'{s}'",
        float f => f.ToString(CultureInfo.InvariantCulture),
        float[] a => "[" + string.Join(", ", a.Select(x => x.ToString(CultureInfo.InvariantCulture))) + "]",
        IFormattable f => f.ToString(null, CultureInfo.InvariantCulture),
        _ => v.ToString() ?? "",
    };

    /// <summary>The most common width×height among <paramref name="frames"/>, read from the file headers (null when none can be read).</summary>
    public static FrameSize? CommonFrameSize(IReadOnlyList<string> frames)
    {
        var counts = new Dictionary<(int, int), int>();
        foreach (string f in frames)
        {
            try
            {
                var info = Image.Identify(f);
                if (info is null) continue;
                // EXIF orientations 5..8 turn the frame a quarter: the decoder scores it turned, so count it turned.
                bool turned = info.Metadata.ExifProfile?.GetValue(SixLabors.ImageSharp.Metadata.Profiles.Exif.ExifTag.Orientation)?.Value is >= 5 and <= 8;
                var key = turned ? (info.Height, info.Width) : (info.Width, info.Height);
                counts[key] = counts.GetValueOrDefault(key) + 1;
            }
            catch (Exception e) when (e is IOException or UnknownImageFormatException or InvalidImageContentException) { }
        }
        if (counts.Count == 0) return null;
        var best = counts.OrderByDescending(kv => kv.Value).ThenBy(kv => kv.Key.Item1).First().Key;
        return new FrameSize(best.Item1, best.Item2);
    }
}

public sealed record FrameSize([property: JsonPropertyName("width")] int Width, [property: JsonPropertyName("height")] int Height);
