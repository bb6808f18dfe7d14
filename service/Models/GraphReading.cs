using System.Globalization;
using Microsoft.ML.OnnxRuntime;
using Onnx;

namespace Strayspot.Service.Models;

/// <summary>One descriptor field as <c>inspect</c> guesses it, with the reason; <see cref="Decided"/> false marks a guess the graph could not settle.</summary>
public sealed record DescriptorGuess(string Field, string Value, string Reason, bool Decided);

/// <summary>What the graph itself tells about preprocessing and output, read from its nodes.</summary>
public sealed record GraphReading(
    bool NormalizesInside,
    bool TakesByteRange,
    IReadOnlyList<string> NormalizationSteps,
    bool EndsInSoftmax,
    string? SoftmaxNode,
    string? ChannelOrderHint)
{
    /// <summary>Operators that pass pixels on unchanged in value, between the input and the first convolution.</summary>
    private static readonly HashSet<string> Passing = ["Transpose", "Cast", "Identity", "Reshape", "Unsqueeze", "Squeeze"];

    /// <summary>Operators after which a Softmax still decides what the output holds (they move or resize, never re-weigh).</summary>
    private static readonly HashSet<string> Resampling = ["Resize", "Upsample", "Transpose", "Identity", "Reshape", "Squeeze", "Unsqueeze", "Cast", "Slice"];

    public static GraphReading Read(ModelProto model, string inputName, string outputName)
    {
        var graph = model.Graph;
        var constants = new Dictionary<string, float[]>(StringComparer.Ordinal);
        foreach (var t in graph.Initializer) if (Floats(t) is { } v) constants[t.Name] = v;
        foreach (var n in graph.Node)
            if (n.OpType == "Constant" && n.Output.Count == 1 && n.Attribute.FirstOrDefault(a => a.Name == "value")?.T is { } t && Floats(t) is { } v)
                constants[n.Output[0]] = v;

        // Follow the input forward through value-preserving steps and constant arithmetic, up to the first Conv.
        var steps = new List<string>();
        var scaleHints = new List<float>();
        string current = inputName;
        for (int guard = 0; guard < 32; guard++)
        {
            var consumers = graph.Node.Where(n => n.Input.Contains(current)).ToList();
            if (consumers.Count != 1) break;
            var node = consumers[0];
            if (node.OpType is "Conv" or "ConvInteger" or "QLinearConv") break;
            if (node.OpType is "Sub" or "Div" or "Mul" or "Add" && node.Input.Count == 2)
            {
                string other = node.Input[0] == current ? node.Input[1] : node.Input[0];
                if (!constants.TryGetValue(other, out var c)) break;
                steps.Add($"{node.OpType} {Show(c)}");
                foreach (float x in c)
                    scaleHints.Add(node.OpType switch { "Mul" => x == 0 ? 0 : 1 / Math.Abs(x), _ => Math.Abs(x) });
            }
            else if (!Passing.Contains(node.OpType)) break;
            current = node.Output[0];
        }
        // Constants of a few hundred (means like 120, divisors like 58 or 255) belong to pixels of 0..255.
        bool byteRange = scaleHints.Any(v => v > 2.5f);

        string? softmax = null;
        string tensor = outputName;
        for (int guard = 0; guard < 16; guard++)
        {
            var producer = graph.Node.FirstOrDefault(n => n.Output.Contains(tensor));
            if (producer is null) break;
            if (producer.OpType == "Softmax") { softmax = producer.Name.Length > 0 ? producer.Name : "Softmax"; break; }
            if (!Resampling.Contains(producer.OpType) || producer.Input.Count == 0) break;
            tensor = producer.Input[0];
        }

        string lower = inputName.ToLowerInvariant();
        string? order = lower.Contains("bgr", StringComparison.Ordinal) ? "bgr" : lower.Contains("rgb", StringComparison.Ordinal) ? "rgb" : null;
        return new GraphReading(steps.Count > 0, byteRange, steps, softmax is not null, softmax, order);
    }

    private static float[]? Floats(TensorProto t)
    {
        if (t.DataType != (int)TensorProto.Types.DataType.Float || t.DataLocation == TensorProto.Types.DataLocation.External) return null;
        if (t.FloatData.Count > 0) return t.FloatData.ToArray();
        if (t.RawData.Length > 0 && t.RawData.Length % 4 == 0)
        {
            var bytes = t.RawData.Span;
            var v = new float[bytes.Length / 4];
            for (int i = 0; i < v.Length; i++) v[i] = BitConverter.ToSingle(bytes.Slice(4 * i, 4));
            return v;
        }
        return null;
    }

    private static string Show(float[] v) => v.Length > 6 ? $"({v.Length} values)"
        : "[" + string.Join(", ", v.Select(x => x.ToString("0.####", CultureInfo.InvariantCulture))) + "]";
}

/// <summary>Runs a model on blank probe frames to learn its output stride and the size multiple it needs.</summary>
public static class SizeProbe
{
    public sealed record Result(int Stride, int Multiple);

    /// <summary>Null when even the base probe fails (the model takes no square frames of these sizes).</summary>
    public static Result? Run(InferenceSession session, string input, string output, bool channelsLast)
    {
        const int Base = 128;
        if (Probe(session, input, output, channelsLast, Base) is not { } baseOut || baseOut < 1) return null;
        int stride = Base % baseOut == 0 ? Base / baseOut : 0;
        if (stride < 1) return new Result(0, 32);
        // The smallest multiple m for which a side of m·odd still maps exactly onto the output grid.
        foreach (int m in new[] { 1, 2, 4, 8, 16, 32, 64 })
        {
            int side = Base + m;
            if (Probe(session, input, output, channelsLast, side) is int o && o * stride == side) return new Result(stride, m);
        }
        return new Result(stride, 64);
    }

    private static int? Probe(InferenceSession session, string input, string output, bool channelsLast, int side)
    {
        long[] shape = channelsLast ? [1, side, side, 3] : [1, 3, side, side];
        var data = new float[3 * side * side];
        try
        {
            using var value = OrtValue.CreateTensorValueFromMemory(data, shape);
            using var run = new RunOptions();
            using var results = session.Run(run, [input], [value], [output]);
            var dims = results[0].GetTensorTypeAndShape().Shape;
            return dims.Length >= 2 ? (int)dims[^1] : null;
        }
        catch (OnnxRuntimeException)
        {
            return null;
        }
    }
}
