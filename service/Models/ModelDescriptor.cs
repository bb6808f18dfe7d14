using System.Text.Json.Serialization;

namespace Strayspot.Service.Models;

/// <summary>
/// What a user writes beside <c>model.onnx</c> (file <c>descriptor.json</c>) so the service can feed
/// the model and read its output. Schema: models/descriptor.schema.json; guide: models/README.md.
/// </summary>
public sealed partial record ModelDescriptor
{
    [JsonPropertyName("name")] public string Name { get; init; } = "";
    [JsonPropertyName("description")] public string? Description { get; init; }
    [JsonPropertyName("classes")] public List<ClassDescriptor> Classes { get; init; } = new();
    [JsonPropertyName("input")] public InputDescriptor Input { get; init; } = new();
    [JsonPropertyName("output")] public OutputDescriptor Output { get; init; } = new();
}

public sealed record ClassDescriptor
{
    [JsonPropertyName("name")] public string Name { get; init; } = "";
    /// <summary>"#rrggbb"; when absent a distinct colour is generated.</summary>
    [JsonPropertyName("color")] public string? Color { get; init; }
    /// <summary>Part of the region-of-interest filter (e.g. the ground a vehicle drives on).</summary>
    [JsonPropertyName("surface")] public bool Surface { get; init; }
}

public sealed record InputDescriptor
{
    [JsonPropertyName("tensor")] public string Tensor { get; init; } = "input";
    /// <summary>"nchw" or "nhwc".</summary>
    [JsonPropertyName("layout")] public string Layout { get; init; } = "nchw";
    /// <summary>"rgb" or "bgr".</summary>
    [JsonPropertyName("channelOrder")] public string ChannelOrder { get; init; } = "rgb";
    /// <summary>Pixel values are divided by this before mean/std (255 maps bytes to 0..1; 1 keeps 0..255).</summary>
    [JsonPropertyName("valueScale")] public float ValueScale { get; init; } = 255f;
    [JsonPropertyName("mean")] public float[] Mean { get; init; } = [0f, 0f, 0f];
    [JsonPropertyName("std")] public float[] Std { get; init; } = [1f, 1f, 1f];
    [JsonPropertyName("size")] public SizePolicy Size { get; init; } = new();
}

public sealed record SizePolicy
{
    /// <summary>
    /// Largest network input (height × width) a frame may become: 8192² pixels, 805 MB of float32 planes before the
    /// network's own activations. Above it a descriptor is refused at load and a frame (a 20000×1 strip under
    /// <c>resizeSide: shortest</c>) is refused before any tensor is allocated, rather than overflowing.
    /// </summary>
    public const long MaxInputPixels = 8192L * 8192;
    /// <summary>No network's total stride comes near this; a larger multiple only pads frames into huge tensors.</summary>
    public const int MaxPadMultiple = 1024;

    /// <summary>"fixed" (resize to height×width) or "dynamic" (resize to a side length, pad to a multiple).</summary>
    [JsonPropertyName("mode")] public string Mode { get; init; } = "fixed";
    [JsonPropertyName("height")] public int? Height { get; init; }
    [JsonPropertyName("width")] public int? Width { get; init; }
    /// <summary>dynamic: "longest" or "shortest" side is resized to <see cref="SideLength"/>; absent keeps the frame's size.</summary>
    [JsonPropertyName("resizeSide")] public string? ResizeSide { get; init; }
    [JsonPropertyName("sideLength")] public int? SideLength { get; init; }
    /// <summary>dynamic: pad height and width up to a multiple of this (bottom and right).</summary>
    [JsonPropertyName("padMultiple")] public int PadMultiple { get; init; } = 1;
}

public sealed record OutputDescriptor
{
    [JsonPropertyName("tensor")] public string Tensor { get; init; } = "logits";
    /// <summary>"logits" or "probabilities" (then only MSP and entropy are meaningful).</summary>
    [JsonPropertyName("kind")] public string Kind { get; init; } = "logits";
}
