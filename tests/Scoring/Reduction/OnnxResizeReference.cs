using Google.Protobuf;
using Microsoft.ML.OnnxRuntime;
using Microsoft.ML.OnnxRuntime.Tensors;
using Onnx;

namespace Strayspot.Tests.Scoring.Reduction;

/// <summary>
/// Outside reference: ONNX Runtime's own <c>Resize</c> operator (opset 13, mode=linear,
/// coordinate_transformation_mode=half_pixel), run as a one-node graph built here.
/// </summary>
internal static class OnnxResizeReference
{
    public static float[] Resize(float[] chw, int c, int h, int w, int outH, int outW)
    {
        var graph = new GraphProto { Name = "resize_only" };
        graph.Input.Add(ValueInfo("X", 1, c, h, w));
        graph.Output.Add(ValueInfo("Y", 1, c, outH, outW));
        var sizes = new TensorProto { Name = "sizes", DataType = (int)TensorProto.Types.DataType.Int64, Dims = { 4 } };
        sizes.Int64Data.Add(new long[] { 1, c, outH, outW });
        graph.Initializer.Add(sizes);
        var node = new NodeProto { OpType = "Resize", Name = "resize", Input = { "X", "", "", "sizes" }, Output = { "Y" } };
        node.Attribute.Add(new AttributeProto { Name = "mode", Type = AttributeProto.Types.AttributeType.String, S = ByteString.CopyFromUtf8("linear") });
        node.Attribute.Add(new AttributeProto
        {
            Name = "coordinate_transformation_mode",
            Type = AttributeProto.Types.AttributeType.String,
            S = ByteString.CopyFromUtf8("half_pixel"),
        });
        graph.Node.Add(node);
        var model = new ModelProto { IrVersion = 8, ProducerName = "strayspot-tests", Graph = graph };
        model.OpsetImport.Add(new OperatorSetIdProto { Domain = "", Version = 13 });

        using var session = new InferenceSession(model.ToByteArray());
        var input = NamedOnnxValue.CreateFromTensor("X", new DenseTensor<float>(chw, [1, c, h, w]));
        using var results = session.Run([input]);
        var y = results.First().AsTensor<float>();
        Assert.Equal(new[] { 1, c, outH, outW }, y.Dimensions.ToArray());
        return y.ToArray();
    }

    private static ValueInfoProto ValueInfo(string name, params long[] dims)
    {
        var shape = new TensorShapeProto();
        foreach (long d in dims) shape.Dim.Add(new TensorShapeProto.Types.Dimension { DimValue = d });
        return new ValueInfoProto
        {
            Name = name,
            Type = new TypeProto { TensorType = new TypeProto.Types.Tensor { ElemType = (int)TensorProto.Types.DataType.Float, Shape = shape } },
        };
    }
}
