using Google.Protobuf;
using Onnx;
using Strayspot.Service.Models;

namespace Strayspot.Tests.Support;

/// <summary>
/// Tiny segmentation-shaped ONNX graphs built in code: a 1×1 convolution from 3 channels to C "logits",
/// optionally average-pooled by a stride and fed channels-last through a Transpose. <see cref="Reference"/>
/// computes the same arithmetic in C# so tests can compare the runtime's output with it.
/// </summary>
public sealed class TestSegmentationGraph
{
    public int Classes { get; init; } = 3;
    public int Stride { get; init; } = 1;
    public bool ChannelsLast { get; init; }
    /// <summary>Null for symbolic height/width ("height", "width").</summary>
    public int? FixedHeight { get; init; }
    public int? FixedWidth { get; init; }
    public string InputName { get; init; } = "pixels";
    public string OutputName { get; init; } = "scores";
    public int Opset { get; init; } = 13;
    /// <summary>Ends the graph in Softmax over the classes (the output is probabilities).</summary>
    public bool Softmax { get; init; }
    /// <summary>When set, the graph itself subtracts this mean and divides by <see cref="InsideStd"/> before the convolution (per channel, NCHW).</summary>
    public float[]? InsideMean { get; init; }
    public float[]? InsideStd { get; init; }

    /// <summary>Weight of class c for input channel k: deterministic and distinct per class.</summary>
    public float Weight(int c, int k) => 0.25f * (c + 1) * (k == 0 ? 1f : k == 1 ? -0.5f : 0.75f) + 0.1f * c * k;
    public float Bias(int c) => 0.3f * c - 0.2f;

    public ModelProto Build()
    {
        var graph = new GraphProto { Name = "tiny_seg" };
        var h = FixedHeight is int fh ? Dim(fh) : Dim("height");
        var w = FixedWidth is int fw ? Dim(fw) : Dim("width");
        graph.Input.Add(ValueInfo(InputName, ChannelsLast ? [Dim(1), h, w, Dim(3)] : [Dim(1), Dim(3), h, w]));
        string current = InputName;
        if (ChannelsLast)
        {
            var t = new NodeProto { OpType = "Transpose", Name = "to_nchw", Input = { current }, Output = { "nchw" } };
            t.Attribute.Add(new AttributeProto { Name = "perm", Type = AttributeProto.Types.AttributeType.Ints, Ints = { 0, 3, 1, 2 } });
            graph.Node.Add(t);
            current = "nchw";
        }
        if (InsideMean is not null && InsideStd is not null)
        {
            graph.Initializer.Add(Constant("norm_mean", InsideMean, [1, 3, 1, 1]));
            graph.Initializer.Add(Constant("norm_std", InsideStd, [1, 3, 1, 1]));
            graph.Node.Add(new NodeProto { OpType = "Sub", Name = "centre", Input = { current, "norm_mean" }, Output = { "centred" } });
            graph.Node.Add(new NodeProto { OpType = "Div", Name = "scale", Input = { "centred", "norm_std" }, Output = { "normalized" } });
            current = "normalized";
        }
        var weight = new TensorProto { Name = "conv_w", DataType = (int)TensorProto.Types.DataType.Float, Dims = { Classes, 3, 1, 1 } };
        var bias = new TensorProto { Name = "conv_b", DataType = (int)TensorProto.Types.DataType.Float, Dims = { Classes } };
        for (int c = 0; c < Classes; c++)
        {
            for (int k = 0; k < 3; k++) weight.FloatData.Add(Weight(c, k));
            bias.FloatData.Add(Bias(c));
        }
        graph.Initializer.Add(weight);
        graph.Initializer.Add(bias);
        string finalLogits = Softmax ? "logits_before_softmax" : OutputName;
        string convOut = Stride > 1 ? "conv" : finalLogits;
        graph.Node.Add(new NodeProto { OpType = "Conv", Name = "classify", Input = { current, "conv_w", "conv_b" }, Output = { convOut } });
        if (Stride > 1)
        {
            var pool = new NodeProto { OpType = "AveragePool", Name = "downsample", Input = { convOut }, Output = { finalLogits } };
            pool.Attribute.Add(new AttributeProto { Name = "kernel_shape", Type = AttributeProto.Types.AttributeType.Ints, Ints = { Stride, Stride } });
            pool.Attribute.Add(new AttributeProto { Name = "strides", Type = AttributeProto.Types.AttributeType.Ints, Ints = { Stride, Stride } });
            graph.Node.Add(pool);
        }
        if (Softmax)
        {
            var softmax = new NodeProto { OpType = "Softmax", Name = "probabilities", Input = { finalLogits }, Output = { OutputName } };
            softmax.Attribute.Add(new AttributeProto { Name = "axis", Type = AttributeProto.Types.AttributeType.Int, I = 1 });
            graph.Node.Add(softmax);
        }
        graph.Output.Add(ValueInfo(OutputName, [Dim(1), Dim(Classes), Dim("out_h"), Dim("out_w")]));
        var model = new ModelProto { IrVersion = 8, ProducerName = "strayspot-tests", ProducerVersion = "1", Graph = graph };
        model.OpsetImport.Add(new OperatorSetIdProto { Domain = "", Version = Opset });
        return model;
    }

    /// <summary>The graph's arithmetic on an NCHW input [3,H,W]: returns [C, H/s, W/s] (floor, like the pool).</summary>
    public float[] Reference(ReadOnlySpan<float> nchw, int height, int width)
    {
        int oh = height / Stride, ow = width / Stride, plane = height * width;
        var result = new float[Classes * oh * ow];
        for (int c = 0; c < Classes; c++)
            for (int y = 0; y < oh; y++)
                for (int x = 0; x < ow; x++)
                {
                    double sum = 0;
                    for (int dy = 0; dy < Stride; dy++)
                        for (int dx = 0; dx < Stride; dx++)
                        {
                            int i = (y * Stride + dy) * width + x * Stride + dx;
                            double v = Bias(c);
                            for (int k = 0; k < 3; k++) v += Weight(c, k) * nchw[k * plane + i];
                            sum += v;
                        }
                    result[(c * oh + y) * ow + x] = (float)(sum / (Stride * Stride));
                }
        return result;
    }

    public ModelDescriptor Descriptor(SizePolicy? size = null, int? classCount = null) => new()
    {
        Name = "tiny",
        Classes = Enumerable.Range(0, classCount ?? Classes).Select(i => new ClassDescriptor { Name = $"c{i}" }).ToList(),
        Input = new InputDescriptor
        {
            Tensor = InputName,
            Layout = ChannelsLast ? "nhwc" : "nchw",
            Size = size ?? (FixedHeight is int fh && FixedWidth is int fw
                ? new SizePolicy { Mode = "fixed", Height = fh, Width = fw }
                : new SizePolicy { Mode = "dynamic", PadMultiple = Math.Max(1, Stride) }),
        },
        Output = new OutputDescriptor { Tensor = OutputName, Kind = Softmax ? "probabilities" : "logits" },
    };

    /// <summary>Writes model.onnx and descriptor.json into <paramref name="folder"/>.</summary>
    public string WriteFolder(string folder, ModelDescriptor? descriptor = null)
    {
        Directory.CreateDirectory(folder);
        File.WriteAllBytes(Path.Combine(folder, SegmentationModel.ModelFileName), Build().ToByteArray());
        (descriptor ?? Descriptor()).Save(Path.Combine(folder, ModelDescriptor.FileName));
        return folder;
    }

    private static TensorProto Constant(string name, float[] values, long[] dims)
    {
        var t = new TensorProto { Name = name, DataType = (int)TensorProto.Types.DataType.Float };
        t.Dims.AddRange(dims);
        t.FloatData.AddRange(values);
        return t;
    }

    private static TensorShapeProto.Types.Dimension Dim(long v) => new() { DimValue = v };
    private static TensorShapeProto.Types.Dimension Dim(string name) => new() { DimParam = name };

    private static ValueInfoProto ValueInfo(string name, TensorShapeProto.Types.Dimension[] dims)
    {
        var shape = new TensorShapeProto();
        shape.Dim.AddRange(dims);
        return new ValueInfoProto
        {
            Name = name,
            Type = new TypeProto { TensorType = new TypeProto.Types.Tensor { ElemType = (int)TensorProto.Types.DataType.Float, Shape = shape } },
        };
    }
}

/// <summary>A temporary folder removed at dispose.</summary>
public sealed class TempFolder : IDisposable
{
    public TempFolder()
    {
        Path = System.IO.Path.Combine(System.IO.Path.GetTempPath(), "strayspot-tests-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Path);
    }

    public string Path { get; }
    public string this[string name] => System.IO.Path.Combine(Path, name);

    public void Dispose()
    {
        try { Directory.Delete(Path, recursive: true); } catch (IOException) { }
    }
}
