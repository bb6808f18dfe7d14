using System.Security.Cryptography;
using Microsoft.ML.OnnxRuntime;
using SessionOptions = Microsoft.ML.OnnxRuntime.SessionOptions;

namespace Strayspot.Service.Models;

/// <summary>One input or output of an ONNX model; symbolic dimensions keep their names, unknown ones show as "?".</summary>
public sealed record TensorFacts(string Name, string ElementType, IReadOnlyList<string> Shape);

public sealed record ModelFacts(string Path, long FileBytes, string Sha256, long IrVersion, long Opset, string Producer,
    IReadOnlyList<TensorFacts> Inputs, IReadOnlyList<TensorFacts> Outputs);

/// <summary>Describes any .onnx file and guesses a starter descriptor for it.</summary>
public static class ModelInspector
{
    public static ModelFacts Inspect(string modelPath)
    {
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
            return new ModelFacts(modelPath, bytes.LongLength, Convert.ToHexStringLower(SHA256.HashData(bytes)),
                facts.IrVersion, facts.Opset, producer, Describe(session.InputMetadata), Describe(session.OutputMetadata));
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

    /// <summary>
    /// A descriptor guess: names "class_0".., layout from where the 3 sits in the input shape, the first input and
    /// output names, fixed size when the input has fixed height and width. Mean/std are left neutral: fill in training's.
    /// </summary>
    public static ModelDescriptor StarterDescriptor(ModelFacts facts, string? name = null)
    {
        if (facts.Inputs.Count == 0 || facts.Outputs.Count == 0)
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"{facts.Path} has no input or no output.");
        var input = facts.Inputs[0];
        var output = facts.Outputs[0];
        bool nhwc = input.Shape.Count == 4 && input.Shape[3] == "3" && input.Shape[1] != "3";
        int? h = null, w = null;
        if (input.Shape.Count == 4)
        {
            h = int.TryParse(nhwc ? input.Shape[1] : input.Shape[2], out int hh) && hh > 0 ? hh : null;
            w = int.TryParse(nhwc ? input.Shape[2] : input.Shape[3], out int ww) && ww > 0 ? ww : null;
        }
        int classes = 1;
        if (output.Shape.Count is 3 or 4 && int.TryParse(output.Shape[output.Shape.Count - 3], out int c) && c > 0)
            classes = c;
        var size = h is not null && w is not null
            ? new SizePolicy { Mode = "fixed", Height = h, Width = w }
            : new SizePolicy { Mode = "dynamic", ResizeSide = "longest", SideLength = 1024, PadMultiple = 32 };
        return new ModelDescriptor
        {
            Name = name ?? Path.GetFileNameWithoutExtension(facts.Path),
            Description = "Starter descriptor written by 'strayspot inspect': check every field.",
            Classes = Enumerable.Range(0, classes).Select(i => new ClassDescriptor { Name = $"class_{i}" }).ToList(),
            Input = new InputDescriptor { Tensor = input.Name, Layout = nhwc ? "nhwc" : "nchw", Size = size },
            Output = new OutputDescriptor { Tensor = output.Name, Kind = "logits" },
        };
    }
}
