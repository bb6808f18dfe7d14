using Google.Protobuf;
using Onnx;

namespace Strayspot.Service.Models;

/// <summary>What the ONNX file itself says, read from its protobuf without creating a session.</summary>
public sealed record OnnxGraphFacts(long IrVersion, string ProducerName, string ProducerVersion,
    IReadOnlyList<(string Domain, long Version)> Opsets, IReadOnlyList<string> ExternalDataLocations)
{
    /// <summary>The default-domain opset, or 0 when the file lists none.</summary>
    public long Opset => Opsets.FirstOrDefault(o => o.Domain is "" or "ai.onnx").Version;

    public static OnnxGraphFacts Parse(byte[] bytes, string source)
    {
        ModelProto model;
        try
        {
            model = ModelProto.Parser.ParseFrom(bytes);
        }
        catch (InvalidProtocolBufferException e)
        {
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"{source} is not a readable ONNX model (damaged or truncated protobuf): {e.Message}", e);
        }
        if (model.Graph is null || model.Graph.Node.Count == 0)
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"{source} holds no ONNX graph (no nodes).");
        var locations = new List<string>();
        CollectExternal(model.Graph, locations);
        var opsets = model.OpsetImport.Select(o => (o.Domain, o.Version)).ToList();
        return new OnnxGraphFacts(model.IrVersion, model.ProducerName, model.ProducerVersion, opsets, locations);
    }

    /// <summary>Refuses external-data locations that are absolute or climb out of <paramref name="folder"/>.</summary>
    public void EnsureExternalDataInside(string folder, string source)
    {
        string root = Path.GetFullPath(folder);
        string rootWithSep = root.EndsWith(Path.DirectorySeparatorChar) ? root : root + Path.DirectorySeparatorChar;
        foreach (var location in ExternalDataLocations)
        {
            string full = Path.GetFullPath(Path.Combine(root, location));
            if (Path.IsPathRooted(location) || !full.StartsWith(rootWithSep, StringComparison.Ordinal))
                throw new ModelException(ModelErrorCodes.ModelExternalData,
                    $"{source} keeps weights in external data at '{location}', which is outside the model folder '{root}'. " +
                    "Move the data file into the model folder and re-export with a relative location.");
        }
    }

    private static void CollectExternal(GraphProto graph, List<string> into)
    {
        foreach (var t in graph.Initializer)
            AddLocation(t, into);
        foreach (var node in graph.Node)
            foreach (var a in node.Attribute)
            {
                if (a.T is not null) AddLocation(a.T, into);
                foreach (var t in a.Tensors) AddLocation(t, into);
                if (a.G is not null) CollectExternal(a.G, into);
                foreach (var g in a.Graphs) CollectExternal(g, into);
            }
    }

    private static void AddLocation(TensorProto t, List<string> into)
    {
        if (t.DataLocation != TensorProto.Types.DataLocation.External) return;
        foreach (var e in t.ExternalData)
            if (e.Key == "location") into.Add(e.Value);
    }
}
