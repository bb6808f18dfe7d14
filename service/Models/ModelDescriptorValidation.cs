using System.Globalization;
using System.Text.Json;

namespace Strayspot.Service.Models;

public sealed partial record ModelDescriptor
{
    public const string FileName = "descriptor.json";

    private static readonly JsonSerializerOptions ReadOptions = new()
    {
        // A misspelt field would otherwise fall back to its default without a word.
        UnmappedMemberHandling = System.Text.Json.Serialization.JsonUnmappedMemberHandling.Disallow,
        ReadCommentHandling = JsonCommentHandling.Skip,
        AllowTrailingCommas = true,
    };

    internal static readonly JsonSerializerOptions WriteOptions = new() { WriteIndented = true };

    /// <summary>Reads and validates a descriptor file; every problem is listed in one <see cref="ModelException"/>.</summary>
    public static ModelDescriptor Load(string path)
    {
        string json;
        try { json = File.ReadAllText(path); }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new ModelException(ModelErrorCodes.DescriptorInvalid, $"Cannot read the descriptor '{path}': {e.Message}", e);
        }
        return Parse(json, path);
    }

    public static ModelDescriptor Parse(string json, string source = "descriptor")
    {
        ModelDescriptor? d;
        System.Text.Json.Nodes.JsonNode? tree;
        var documentOptions = new JsonDocumentOptions { CommentHandling = JsonCommentHandling.Skip, AllowTrailingCommas = true, AllowDuplicateProperties = false };
        try { tree = System.Text.Json.Nodes.JsonNode.Parse(json, documentOptions: documentOptions); }
        catch (JsonException e)
        {
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"{source} is not valid JSON (line {e.LineNumber + 1}, position {e.BytePositionInLine + 1}).", e);
        }
        List<string> unknown;
        // A key given twice in one object surfaces only when the tree is walked.
        try { unknown = DescriptorKeys.Unknown(tree); }
        catch (ArgumentException e)
        {
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"{source} gives a key twice in one object; each key may appear once ({e.Message.Split('\n')[0]}).", e);
        }
        if (unknown.Count > 0)
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"{source} has {unknown.Count} problem(s):\n  - " + string.Join("\n  - ", unknown));
        try { d = JsonSerializer.Deserialize<ModelDescriptor>(json, ReadOptions); }
        catch (JsonException e)
        {
            // The runtime's own message names .NET types; say which field and what kind of value it takes.
            string field = e.Path?.TrimStart('$', '.') is { Length: > 0 } f ? f : "(top level)";
            string expected = DescriptorKeys.ExpectedKind(e.Path) is { } k ? $" it takes {k}" : "";
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"{source} has 1 problem(s):\n  - {field}: wrong kind of value;{expected} (see models/descriptor.schema.json).", e);
        }
        if (d is null)
            throw new ModelException(ModelErrorCodes.DescriptorInvalid, $"{source} is empty (JSON null).");
        d.EnsureValid(source);
        return d;
    }

    public void Save(string path) => File.WriteAllText(path, JsonSerializer.Serialize(this, WriteOptions));

    public void EnsureValid(string source = "descriptor")
    {
        var problems = Validate();
        if (problems.Count > 0)
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"{source} has {problems.Count} problem(s):\n  - " + string.Join("\n  - ", problems));
    }

    /// <summary>One line per problem, each naming the field path, e.g. <c>classes[2].color</c>.</summary>
    public IReadOnlyList<string> Validate()
    {
        var p = new List<string>();
        if (string.IsNullOrWhiteSpace(Name)) p.Add("name: must be a non-empty string.");
        if (Classes is null || Classes.Count == 0) p.Add("classes: must list at least one class.");
        else
        {
            var seen = new Dictionary<string, int>(StringComparer.Ordinal);
            for (int i = 0; i < Classes.Count; i++)
            {
                var c = Classes[i];
                if (c is null) { p.Add($"classes[{i}]: must be an object."); continue; }
                if (string.IsNullOrWhiteSpace(c.Name)) p.Add($"classes[{i}].name: must be a non-empty string.");
                else if (seen.TryGetValue(c.Name, out int first)) p.Add($"classes[{i}].name: '{c.Name}' repeats classes[{first}].name.");
                else seen[c.Name] = i;
                if (c.Color is not null && !ClassColors.IsHexColor(c.Color))
                    p.Add($"classes[{i}].color: '{c.Color}' is not of the form #rrggbb.");
            }
        }
        ValidateInput(Input, p);
        if (Output is null) p.Add("output: missing.");
        else
        {
            if (string.IsNullOrWhiteSpace(Output.Tensor)) p.Add("output.tensor: must name the model's output.");
            if (Output.Kind is not ("logits" or "probabilities"))
                p.Add($"output.kind: '{Output.Kind}' must be 'logits' or 'probabilities'.");
        }
        return p;
    }

    private static void ValidateInput(InputDescriptor? input, List<string> p)
    {
        if (input is null) { p.Add("input: missing."); return; }
        if (string.IsNullOrWhiteSpace(input.Tensor)) p.Add("input.tensor: must name the model's input.");
        if (input.Layout is not ("nchw" or "nhwc")) p.Add($"input.layout: '{input.Layout}' must be 'nchw' or 'nhwc'.");
        if (input.ChannelOrder is not ("rgb" or "bgr")) p.Add($"input.channelOrder: '{input.ChannelOrder}' must be 'rgb' or 'bgr'.");
        if (!(input.ValueScale > 0) || !float.IsFinite(input.ValueScale))
            p.Add($"input.valueScale: {Num(input.ValueScale)} must be a positive number.");
        if (input.Mean is null || input.Mean.Length != 3) p.Add($"input.mean: needs 3 values; has {input.Mean?.Length ?? 0}.");
        else for (int i = 0; i < 3; i++)
            if (!float.IsFinite(input.Mean[i])) p.Add($"input.mean[{i}]: must be a finite number.");
        if (input.Std is null || input.Std.Length != 3) p.Add($"input.std: needs 3 values; has {input.Std?.Length ?? 0}.");
        else for (int i = 0; i < 3; i++)
            if (!(input.Std[i] > 0) || !float.IsFinite(input.Std[i])) p.Add($"input.std[{i}]: {Num(input.Std[i])} must be greater than 0.");

        var s = input.Size;
        if (s is null) { p.Add("input.size: missing."); return; }
        if (s.PadMultiple < 1) p.Add($"input.size.padMultiple: {s.PadMultiple} must be at least 1.");
        else if (s.PadMultiple > SizePolicy.MaxPadMultiple) p.Add($"input.size.padMultiple: {s.PadMultiple} is above {SizePolicy.MaxPadMultiple}; use the network's total stride.");
        switch (s.Mode)
        {
            case "fixed":
                if (s.Height is not > 0) p.Add($"input.size.height: fixed mode needs a height > 0; got {s.Height?.ToString(CultureInfo.InvariantCulture) ?? "none"}.");
                if (s.Width is not > 0) p.Add($"input.size.width: fixed mode needs a width > 0; got {s.Width?.ToString(CultureInfo.InvariantCulture) ?? "none"}.");
                if (s.Height is > 0 && s.Width is > 0 && (long)s.Height.Value * s.Width.Value > SizePolicy.MaxInputPixels)
                    p.Add($"input.size: {s.Width}×{s.Height} (width×height) is more than {SizePolicy.MaxInputPixels} pixels, the largest network input taken.");
                break;
            case "dynamic":
                if (s.ResizeSide is not null and not ("longest" or "shortest"))
                    p.Add($"input.size.resizeSide: '{s.ResizeSide}' must be 'longest' or 'shortest' (or absent to keep the frame's size).");
                if (s.ResizeSide is not null && s.SideLength is not > 0)
                    p.Add($"input.size.sideLength: resizeSide '{s.ResizeSide}' needs a sideLength > 0; got {s.SideLength?.ToString(CultureInfo.InvariantCulture) ?? "none"}.");
                if (s.SideLength is > 0 && (long)s.SideLength.Value * s.SideLength.Value > SizePolicy.MaxInputPixels)
                    p.Add($"input.size.sideLength: {s.SideLength} is above {(int)Math.Sqrt(SizePolicy.MaxInputPixels)}, the side of the largest network input taken.");
                break;
            default:
                p.Add($"input.size.mode: '{s.Mode}' must be 'fixed' or 'dynamic'.");
                break;
        }
    }

    private static string Num(float v) => v.ToString(CultureInfo.InvariantCulture);

    /// <summary>The colour of each class: the descriptor's, or a generated one when absent.</summary>
    public IReadOnlyList<string> ResolvedColors()
    {
        var colors = new string[Classes.Count];
        for (int i = 0; i < colors.Length; i++)
            colors[i] = Classes[i].Color?.ToLowerInvariant() ?? ClassColors.Generated(i);
        return colors;
    }
}
