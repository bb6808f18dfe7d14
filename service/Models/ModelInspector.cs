using System.Globalization;
using System.Security.Cryptography;
using Microsoft.ML.OnnxRuntime;
using SessionOptions = Microsoft.ML.OnnxRuntime.SessionOptions;

namespace Strayspot.Service.Models;

/// <summary>One input or output of an ONNX model; symbolic dimensions keep their names, unknown ones show as "?".</summary>
public sealed record TensorFacts(string Name, string ElementType, IReadOnlyList<string> Shape);

public sealed record ModelFacts(string Path, long FileBytes, string Sha256, long IrVersion, long Opset, string Producer,
    IReadOnlyList<TensorFacts> Inputs, IReadOnlyList<TensorFacts> Outputs)
{
    /// <summary>What the graph's nodes say about preprocessing and output (null when the model has no input or output).</summary>
    public GraphReading? Reading { get; init; }
    /// <summary>Output stride and size multiple measured on blank probe frames (dynamic-size models only).</summary>
    public SizeProbe.Result? Probe { get; init; }
}

/// <summary>Describes any .onnx file and guesses a starter descriptor for it.</summary>
public static class ModelInspector
{
    public static ModelFacts Inspect(string modelPath)
    {
        if (Directory.Exists(modelPath))
            throw new ModelException(ModelErrorCodes.ModelInvalid,
                $"'{modelPath}' is a folder; inspect reads the .onnx file itself: {Path.Combine(modelPath, SegmentationModel.ModelFileName)}");
        if (!File.Exists(modelPath))
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model file '{modelPath}' does not exist.");
        byte[] bytes = File.ReadAllBytes(modelPath);
        var facts = OnnxGraphFacts.Parse(bytes, modelPath);
        facts.EnsureExternalDataInside(Path.GetDirectoryName(Path.GetFullPath(modelPath))!, modelPath);
        using var so = new SessionOptions { IntraOpNumThreads = 1, GraphOptimizationLevel = GraphOptimizationLevel.ORT_DISABLE_ALL };
        InferenceSession session;
        try { session = new InferenceSession(modelPath, so); }
        catch (OnnxRuntimeException e)
        {
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"ONNX Runtime cannot load '{modelPath}': {e.Message}", e);
        }
        using (session)
        {
            string producer = string.IsNullOrEmpty(facts.ProducerVersion) ? facts.ProducerName : $"{facts.ProducerName} {facts.ProducerVersion}";
            var inputs = Describe(session.InputMetadata);
            var outputs = Describe(session.OutputMetadata);
            GraphReading? reading = null;
            SizeProbe.Result? probe = null;
            if (inputs.Count > 0 && outputs.Count > 0)
            {
                reading = GraphReading.Read(Onnx.ModelProto.Parser.ParseFrom(bytes), inputs[0].Name, outputs[0].Name);
                var shape = inputs[0].Shape;
                bool nhwc = IsChannelsLast(shape);
                bool dynamic = shape.Count == 4 && !(int.TryParse(nhwc ? shape[1] : shape[2], out _) && int.TryParse(nhwc ? shape[2] : shape[3], out _));
                if (dynamic && inputs.Count == 1 && inputs[0].ElementType == "float")
                    probe = SizeProbe.Run(session, inputs[0].Name, outputs[0].Name, nhwc);
            }
            return new ModelFacts(modelPath, bytes.LongLength, Convert.ToHexStringLower(SHA256.HashData(bytes)),
                facts.IrVersion, facts.Opset, producer, inputs, outputs) { Reading = reading, Probe = probe };
        }
    }

    private static List<TensorFacts> Describe(IReadOnlyDictionary<string, NodeMetadata> metadata) =>
        metadata.Select(kv => new TensorFacts(kv.Key,
            kv.Value.IsTensor ? kv.Value.ElementDataType.ToString().ToLowerInvariant() : kv.Value.OnnxValueType.ToString(),
            ShapeOf(kv.Value))).ToList();

    internal static IReadOnlyList<string> ShapeOf(NodeMetadata m)
    {
        if (!m.IsTensor) return [];
        var dims = m.Dimensions;
        var names = m.SymbolicDimensions;
        var shape = new string[dims.Length];
        for (int i = 0; i < dims.Length; i++)
            shape[i] = dims[i] >= 0 ? dims[i].ToString(System.Globalization.CultureInfo.InvariantCulture)
                : (i < names.Length && !string.IsNullOrEmpty(names[i]) ? names[i] : "?");
        return shape;
    }

    internal static string FormatShape(NodeMetadata m) => "[" + string.Join(", ", ShapeOf(m)) + "]";

    private static bool IsChannelsLast(IReadOnlyList<string> shape) => shape.Count == 4 && shape[3] == "3" && shape[1] != "3";

    /// <summary>Each descriptor field <c>inspect</c> can guess, with the reason; the undecided ones are marked.</summary>
    public static IReadOnlyList<DescriptorGuess> Guesses(ModelFacts facts)
    {
        if (facts.Inputs.Count == 0 || facts.Outputs.Count == 0)
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"{facts.Path} has no input or no output.");
        var inv = CultureInfo.InvariantCulture;
        var input = facts.Inputs[0];
        var output = facts.Outputs[0];
        var reading = facts.Reading;
        var g = new List<DescriptorGuess>();
        bool nhwc = IsChannelsLast(input.Shape);
        g.Add(new("input.tensor", input.Name, facts.Inputs.Count == 1 ? "the model's only input" : $"the first of {facts.Inputs.Count} inputs", facts.Inputs.Count == 1));
        g.Add(new("input.layout", nhwc ? "nhwc" : "nchw", $"the 3 colour channels sit at axis {(nhwc ? 3 : 1)} of [{string.Join(", ", input.Shape)}]",
            input.Shape.Count == 4 && (input.Shape[1] == "3" || input.Shape[3] == "3")));
        if (reading?.ChannelOrderHint is { } order)
            g.Add(new("input.channelOrder", order, $"the input tensor is named '{input.Name}'", true));
        else
            g.Add(new("input.channelOrder", "rgb", "no hint in the graph: check what the model was trained on", false));
        if (reading is { NormalizesInside: true })
        {
            string steps = string.Join(" → ", reading.NormalizationSteps);
            g.Add(new("input.valueScale", reading.TakesByteRange ? "1" : "255",
                reading.TakesByteRange
                    ? $"the graph normalizes the input itself ({steps}) with constants of pixel values 0..255, so it is fed 0..255"
                    : $"the graph normalizes the input itself ({steps}) with constants of values 0..1, so it is fed 0..1", true));
            g.Add(new("input.mean", "[0, 0, 0]", "normalization is inside the graph; applying it again would shift every pixel", true));
            g.Add(new("input.std", "[1, 1, 1]", "normalization is inside the graph", true));
        }
        else
        {
            g.Add(new("input.valueScale", "255", "no normalization found before the first convolution: check the training's pixel range", false));
            g.Add(new("input.mean", "[0, 0, 0]", "not in the graph: copy the training's per-channel mean (in the valueScale's units)", false));
            g.Add(new("input.std", "[1, 1, 1]", "not in the graph: copy the training's per-channel std", false));
        }
        var (h, w) = FixedSize(input.Shape, nhwc);
        if (h is int fh && w is int fw)
            g.Add(new("input.size", string.Create(inv, $"fixed {fh}×{fw} (height×width)"), "the input shape fixes height and width; frames are resized to it", true));
        else if (facts.Probe is { } p)
            g.Add(new("input.size", string.Create(inv, $"dynamic, the frame's own size, padMultiple {p.Multiple}"),
                p.Stride > 0
                    ? string.Create(inv, $"the input size is free; blank probes gave output stride {p.Stride} and needed sides that are multiples of {p.Multiple} to map exactly onto the output")
                    : string.Create(inv, $"the input size is free; the output stride is not a whole number, so padding to {p.Multiple} is a guess"), p.Stride > 0));
        else
            g.Add(new("input.size", "dynamic, the frame's own size, padMultiple 32", "the input size is free, but probe frames failed: check the size multiple the network needs", false));
        g.Add(new("output.tensor", output.Name, facts.Outputs.Count == 1 ? "the model's only output" : $"the first of {facts.Outputs.Count} outputs", facts.Outputs.Count == 1));
        if (reading is { EndsInSoftmax: true })
            g.Add(new("output.kind", "probabilities", $"the output comes from a Softmax node ('{reading.SoftmaxNode}'); only msp and entropy apply (or export without it for every method)", true));
        else
            g.Add(new("output.kind", "logits", "the output is not produced by a Softmax", true));
        int classes = ClassCount(output);
        g.Add(new("classes", string.Create(inv, $"{classes} named class_0…class_{classes - 1}"),
            classes > 1 ? $"the output's class axis has {classes} entries: give them their real names" : "the class axis has no fixed size: list the classes", false));
        return g;
    }

    private static (int?, int?) FixedSize(IReadOnlyList<string> shape, bool nhwc)
    {
        if (shape.Count != 4) return (null, null);
        int? h = int.TryParse(nhwc ? shape[1] : shape[2], out int hh) && hh > 0 ? hh : null;
        int? w = int.TryParse(nhwc ? shape[2] : shape[3], out int ww) && ww > 0 ? ww : null;
        return (h, w);
    }

    private static int ClassCount(TensorFacts output) =>
        output.Shape.Count is 3 or 4 && int.TryParse(output.Shape[output.Shape.Count - 3], out int c) && c > 0 ? c : 1;

    /// <summary>A starter descriptor from <see cref="Guesses"/>; the undecided fields keep neutral values to be filled in.</summary>
    public static ModelDescriptor StarterDescriptor(ModelFacts facts, string? name = null)
    {
        var guesses = Guesses(facts);
        var input = facts.Inputs[0];
        var output = facts.Outputs[0];
        bool nhwc = IsChannelsLast(input.Shape);
        var (h, w) = FixedSize(input.Shape, nhwc);
        var reading = facts.Reading;
        bool byteRange = reading is { NormalizesInside: true, TakesByteRange: true };
        var size = h is not null && w is not null
            ? new SizePolicy { Mode = "fixed", Height = h, Width = w }
            : new SizePolicy { Mode = "dynamic", PadMultiple = facts.Probe?.Multiple ?? 32 };
        int classes = ClassCount(output);
        var undecided = guesses.Where(x => !x.Decided).Select(x => x.Field).ToList();
        return new ModelDescriptor
        {
            Name = name ?? Path.GetFileNameWithoutExtension(facts.Path),
            Description = "Starter descriptor written by 'strayspot inspect'. Check before use: " + string.Join(", ", undecided) + ".",
            Classes = Enumerable.Range(0, classes).Select(i => new ClassDescriptor { Name = $"class_{i}" }).ToList(),
            Input = new InputDescriptor
            {
                Tensor = input.Name,
                Layout = nhwc ? "nhwc" : "nchw",
                ChannelOrder = reading?.ChannelOrderHint ?? "rgb",
                ValueScale = byteRange ? 1f : 255f,
                Size = size,
            },
            Output = new OutputDescriptor { Tensor = output.Name, Kind = reading is { EndsInSoftmax: true } ? "probabilities" : "logits" },
        };
    }
}