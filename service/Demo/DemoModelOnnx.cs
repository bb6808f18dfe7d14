using Google.Protobuf;
using Onnx;

namespace Strayspot.Service.Demo;

/// <summary>
/// Writes <see cref="DemoModel"/> as an ONNX graph of standard operators (opset 13): input "input" [1,3,H,W] floats in
/// 0..1 with symbolic H and W, output "logits" [1,C,H/4,W/4].
/// </summary>
public static class DemoModelOnnx
{
    public const int Opset = 13;
    public const string InputName = "input";
    public const string OutputName = "logits";

    public static byte[] ToBytes(DemoModel model) => Build(model).ToByteArray();

    public static ModelProto Build(DemoModel model)
    {
        int d = DemoFeatures.Count, k = model.CentreCount, c = model.ClassCount;
        var g = new GraphProto { Name = "strayspot_demo_apron" };
        g.Input.Add(Value(InputName, Dim(1), Dim(3), Dim("height"), Dim("width")));
        g.Output.Add(Value(OutputName, Dim(1), Dim(c), Dim("cells_high"), Dim("cells_wide")));

        g.Initializer.Add(Floats("grey_w", DemoFeatures.GreyWeights, 1, 3, 1, 1));
        var sobel = new float[18];
        DemoFeatures.SobelX.CopyTo(sobel, 0);
        DemoFeatures.SobelY.CopyTo(sobel, 9);
        g.Initializer.Add(Floats("sobel_w", sobel, 2, 1, 3, 3));
        g.Initializer.Add(Floats("sum_sq_w", [1f, 1f], 1, 2, 1, 1));
        g.Initializer.Add(Floats("sum_sq_eps", [DemoFeatures.GradientEpsilon], 1));
        g.Initializer.Add(Floats("feature_mean", model.FeatureMean, 1, d, 1, 1));
        g.Initializer.Add(Floats("feature_std", model.FeatureStd, 1, d, 1, 1));
        // |z - c|² = |z|² - 2 z·c + |c|²: one 1×1 convolution instead of a [k, d, h, w] difference tensor.
        var minusTwoCentres = new float[model.Centres.Length];
        for (int i = 0; i < minusTwoCentres.Length; i++) minusTwoCentres[i] = -2f * model.Centres[i];
        var centreNorms = new float[k];
        for (int i = 0; i < k; i++)
        {
            double sum = 0;
            for (int j = 0; j < d; j++) sum += (double)model.Centres[i * d + j] * model.Centres[i * d + j];
            centreNorms[i] = (float)sum;
        }
        g.Initializer.Add(Floats("minus_two_centres", minusTwoCentres, k, d, 1, 1));
        g.Initializer.Add(Floats("centre_norms", centreNorms, k));
        g.Initializer.Add(Floats("neg_inv_two_s2", [(float)(-1.0 / (2.0 * model.Bandwidth * model.Bandwidth))]));
        g.Initializer.Add(Floats("head_w", model.Weights, c, k, 1, 1));
        g.Initializer.Add(Longs("axis_1", [1L], 1));
        g.Initializer.Add(Longs("rows_dim", [2L]));
        g.Initializer.Add(Floats("half", [0.5f]));
        g.Initializer.Add(Floats("one", [1f]));
        g.Initializer.Add(Longs("row_column_shape", [1L, 1L, -1L, 1L], 4));

        int s = DemoFeatures.Stride, r = DemoFeatures.Context / 2;
        g.Node.Add(Node("AveragePool", [InputName], "colour_cell", Ints("kernel_shape", s, s), Ints("strides", s, s)));
        g.Node.Add(Node("AveragePool", ["colour_cell"], "colour_context", Ints("kernel_shape", DemoFeatures.Context, DemoFeatures.Context),
            Ints("strides", 1, 1), Ints("pads", r, r, r, r), Int("count_include_pad", 0)));
        g.Node.Add(Node("Conv", [InputName, "grey_w"], "grey"));
        g.Node.Add(Node("Conv", ["grey", "sobel_w"], "gradient", Ints("pads", 1, 1, 1, 1)));
        g.Node.Add(Node("Mul", ["gradient", "gradient"], "gradient_sq"));
        g.Node.Add(Node("Conv", ["gradient_sq", "sum_sq_w", "sum_sq_eps"], "gradient_sum_sq"));
        g.Node.Add(Node("Sqrt", ["gradient_sum_sq"], "gradient_magnitude"));
        g.Node.Add(Node("AveragePool", ["gradient_magnitude"], "texture_linear", Ints("kernel_shape", s, s), Ints("strides", s, s)));
        g.Node.Add(Node("Log", ["texture_linear"], "texture_cell"));
        g.Node.Add(Node("AveragePool", ["texture_cell"], "texture_context", Ints("kernel_shape", DemoFeatures.Context, DemoFeatures.Context),
            Ints("strides", 1, 1), Ints("pads", r, r, r, r), Int("count_include_pad", 0)));
        int wr = DemoFeatures.WideContext / 2;
        g.Node.Add(Node("AveragePool", ["colour_cell"], "colour_wide", Ints("kernel_shape", DemoFeatures.WideContext, DemoFeatures.WideContext),
            Ints("strides", 1, 1), Ints("pads", wr, wr, wr, wr), Int("count_include_pad", 0)));
        g.Node.Add(Node("AveragePool", ["texture_cell"], "texture_wide", Ints("kernel_shape", DemoFeatures.WideContext, DemoFeatures.WideContext),
            Ints("strides", 1, 1), Ints("pads", wr, wr, wr, wr), Int("count_include_pad", 0)));
        // Row position from the tensor's own shape: (row + 0.5) / rows, broadcast over the columns.
        g.Node.Add(Node("Shape", ["texture_cell"], "cell_shape"));
        g.Node.Add(Node("Gather", ["cell_shape", "rows_dim"], "cell_rows", Int("axis", 0)));
        g.Node.Add(Node("Cast", ["cell_rows"], "cell_rows_f", Int("to", (int)TensorProto.Types.DataType.Float)));
        g.Node.Add(Node("Range", ["half", "cell_rows_f", "one"], "row_centres"));
        g.Node.Add(Node("Div", ["row_centres", "cell_rows_f"], "row_fraction"));
        g.Node.Add(Node("Reshape", ["row_fraction", "row_column_shape"], "row_column"));
        g.Node.Add(Node("Expand", ["row_column", "cell_shape"], "row_position"));
        g.Node.Add(Node("ReduceMax", [InputName], "channel_max", Ints("axes", 1), Int("keepdims", 1)));
        g.Node.Add(Node("ReduceMin", [InputName], "channel_min", Ints("axes", 1), Int("keepdims", 1)));
        g.Node.Add(Node("Sub", ["channel_max", "channel_min"], "chroma"));
        g.Node.Add(Node("MaxPool", ["chroma"], "chroma_cell", Ints("kernel_shape", s, s), Ints("strides", s, s)));
        g.Node.Add(Node("Concat", ["colour_cell", "colour_context", "texture_cell", "texture_context", "colour_wide", "texture_wide", "row_position", "chroma_cell"],
            "features", Int("axis", 1)));
        g.Node.Add(Node("Sub", ["features", "feature_mean"], "features_centred"));
        g.Node.Add(Node("Div", ["features_centred", "feature_std"], "features_std"));
        g.Node.Add(Node("Mul", ["features_std", "features_std"], "features_sq"));
        g.Node.Add(Node("ReduceSum", ["features_sq", "axis_1"], "features_norm", Int("keepdims", 1)));
        g.Node.Add(Node("Conv", ["features_std", "minus_two_centres", "centre_norms"], "cross_terms"));
        g.Node.Add(Node("Add", ["cross_terms", "features_norm"], "distance_sq"));
        g.Node.Add(Node("Mul", ["distance_sq", "neg_inv_two_s2"], "exponent"));
        g.Node.Add(Node("Exp", ["exponent"], "activations"));
        g.Node.Add(Node("Conv", ["activations", "head_w"], OutputName));

        var modelProto = new ModelProto
        {
            IrVersion = 7,
            ProducerName = "strayspot",
            ProducerVersion = "demo",
            DocString = "Strayspot bundled demo: apron segmentation (pavement, marking, grass, sky, building, vehicle).",
            Graph = g,
        };
        modelProto.OpsetImport.Add(new OperatorSetIdProto { Domain = "", Version = Opset });
        return modelProto;
    }

    private static TensorShapeProto.Types.Dimension Dim(long value) => new() { DimValue = value };
    private static TensorShapeProto.Types.Dimension Dim(string name) => new() { DimParam = name };

    private static ValueInfoProto Value(string name, params TensorShapeProto.Types.Dimension[] dims)
    {
        var shape = new TensorShapeProto();
        shape.Dim.AddRange(dims);
        return new ValueInfoProto
        {
            Name = name,
            Type = new TypeProto { TensorType = new TypeProto.Types.Tensor { ElemType = (int)TensorProto.Types.DataType.Float, Shape = shape } },
        };
    }

    private static TensorProto Floats(string name, float[] values, params long[] dims)
    {
        var t = new TensorProto { Name = name, DataType = (int)TensorProto.Types.DataType.Float };
        t.Dims.AddRange(dims);
        t.FloatData.AddRange(values);
        return t;
    }

    private static TensorProto Longs(string name, long[] values, params long[] dims)
    {
        var t = new TensorProto { Name = name, DataType = (int)TensorProto.Types.DataType.Int64 };
        t.Dims.AddRange(dims);
        t.Int64Data.AddRange(values);
        return t;
    }

    private static NodeProto Node(string op, string[] inputs, string output, params AttributeProto[] attributes)
    {
        var n = new NodeProto { OpType = op, Name = output + "_" + op.ToLowerInvariant() };
        n.Input.AddRange(inputs);
        n.Output.Add(output);
        n.Attribute.AddRange(attributes);
        return n;
    }

    private static AttributeProto Ints(string name, params long[] values)
    {
        var a = new AttributeProto { Name = name, Type = AttributeProto.Types.AttributeType.Ints };
        a.Ints.AddRange(values);
        return a;
    }

    private static AttributeProto Int(string name, long value) =>
        new() { Name = name, Type = AttributeProto.Types.AttributeType.Int, I = value };
}
