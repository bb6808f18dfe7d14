using System.Reflection;
using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Service.Models;

namespace Strayspot.Tests.Service.Models;

public class ModelDescriptorTests
{
    // Shaped like the demo's apron model: our own classes, no colours taken from anywhere.
    private const string DemoStyle = """
    {
      "name": "apron-seg",
      "description": "Synthetic apron scenes",
      "classes": [
        { "name": "tarmac", "color": "#5a5f66", "surface": true },
        { "name": "marking", "color": "#f2d13a", "surface": true },
        { "name": "grass" },
        { "name": "aircraft" },
        { "name": "vehicle" },
        { "name": "sky" }
      ],
      "input": {
        "tensor": "image", "layout": "nchw", "channelOrder": "rgb", "valueScale": 255,
        "mean": [0.45, 0.46, 0.47], "std": [0.22, 0.23, 0.24],
        "size": { "mode": "dynamic", "resizeSide": "longest", "sideLength": 1024, "padMultiple": 32 }
      },
      "output": { "tensor": "logits", "kind": "logits" }
    }
    """;

    [Fact]
    public void DemoStyleDescriptorIsValidAndRoundTrips()
    {
        var d = ModelDescriptor.Parse(DemoStyle);
        Assert.Empty(d.Validate());
        Assert.Equal(6, d.Classes.Count);
        Assert.True(d.Classes[0].Surface);
        Assert.Equal(1024, d.Input.Size.SideLength);
        var again = ModelDescriptor.Parse(JsonSerializer.Serialize(d));
        Assert.Equal(JsonSerializer.Serialize(d), JsonSerializer.Serialize(again));
    }

    [Fact]
    public void MissingFieldsAreEachNamed()
    {
        var e = Assert.Throws<ModelException>(() => ModelDescriptor.Parse("""{ "input": { "size": { "mode": "fixed" } } }"""));
        Assert.Equal(ModelErrorCodes.DescriptorInvalid, e.Code);
        Assert.Contains("name:", e.Message);
        Assert.Contains("classes:", e.Message);
        Assert.Contains("input.size.height", e.Message);
        Assert.Contains("input.size.width", e.Message);
    }

    [Theory]
    [InlineData("\"classes\": [{\"name\":\"a\"},{\"name\":\"a\"}]", "classes[1].name")]
    [InlineData("\"classes\": [{\"name\":\"a\",\"color\":\"red\"}]", "classes[0].color")]
    [InlineData("\"classes\": [{\"name\":\"a\",\"color\":\"#12345g\"}]", "classes[0].color")]
    [InlineData("\"classes\": [{\"name\":\"\"}]", "classes[0].name")]
    [InlineData("\"classes\": [{\"name\":\"a\"}], \"input\": {\"layout\": \"chw\", \"size\": {\"mode\":\"dynamic\"}}", "input.layout")]
    [InlineData("\"classes\": [{\"name\":\"a\"}], \"input\": {\"channelOrder\": \"rbg\", \"size\": {\"mode\":\"dynamic\"}}", "input.channelOrder")]
    [InlineData("\"classes\": [{\"name\":\"a\"}], \"input\": {\"std\": [1, 0, 1], \"size\": {\"mode\":\"dynamic\"}}", "input.std[1]")]
    [InlineData("\"classes\": [{\"name\":\"a\"}], \"input\": {\"mean\": [1, 0], \"size\": {\"mode\":\"dynamic\"}}", "input.mean")]
    [InlineData("\"classes\": [{\"name\":\"a\"}], \"input\": {\"size\": {\"mode\":\"dynamic\", \"resizeSide\": \"longest\"}}", "input.size.sideLength")]
    [InlineData("\"classes\": [{\"name\":\"a\"}], \"input\": {\"size\": {\"mode\":\"dynamic\", \"padMultiple\": 0}}", "input.size.padMultiple")]
    [InlineData("\"classes\": [{\"name\":\"a\"}], \"input\": {\"size\": {\"mode\":\"stretchy\"}}", "input.size.mode")]
    [InlineData("\"classes\": [{\"name\":\"a\"}], \"input\": {\"size\": {\"mode\":\"dynamic\"}}, \"output\": {\"kind\": \"softmax\"}", "output.kind")]
    public void EachRuleNamesItsField(string body, string field)
    {
        var e = Assert.Throws<ModelException>(() => ModelDescriptor.Parse("{ \"name\": \"m\", " + body + " }"));
        Assert.Equal(ModelErrorCodes.DescriptorInvalid, e.Code);
        Assert.Contains(field, e.Message);
    }

    [Fact]
    public void MisspeltFieldAndBrokenJsonAreRefused()
    {
        var e = Assert.Throws<ModelException>(() => ModelDescriptor.Parse("""{ "name": "m", "clases": [] }"""));
        Assert.Equal(ModelErrorCodes.DescriptorInvalid, e.Code);
        Assert.Contains("clases", e.Message);
        Assert.Equal(ModelErrorCodes.DescriptorInvalid, Assert.Throws<ModelException>(() => ModelDescriptor.Parse("{ \"name\": ")).Code);
        Assert.Equal(ModelErrorCodes.DescriptorInvalid, Assert.Throws<ModelException>(() => ModelDescriptor.Parse("null")).Code);
    }

    [Fact]
    public void GeneratedColoursAreValidAndDistinct()
    {
        var colours = Enumerable.Range(0, 64).Select(ClassColors.Generated).ToList();
        Assert.All(colours, c => Assert.True(ClassColors.IsHexColor(c), c));
        Assert.Equal(64, colours.Distinct().Count());
        // Neighbouring classes differ clearly (sum of channel differences).
        for (int i = 1; i < colours.Count; i++)
        {
            var (r1, g1, b1) = ClassColors.Parse(colours[i - 1]);
            var (r2, g2, b2) = ClassColors.Parse(colours[i]);
            Assert.True(Math.Abs(r1 - r2) + Math.Abs(g1 - g2) + Math.Abs(b1 - b2) > 60, $"{colours[i - 1]} vs {colours[i]}");
        }
        var d = ModelDescriptor.Parse(DemoStyle);
        Assert.Equal("#5a5f66", d.ResolvedColors()[0]);
        Assert.Equal(ClassColors.Generated(2), d.ResolvedColors()[2]);
    }

    [Fact]
    public void SchemaFileIsJsonAndListsTheRecordsPropertyNames()
    {
        string path = FindRepoFile("models/descriptor.schema.json");
        using var doc = JsonDocument.Parse(File.ReadAllText(path));
        var root = doc.RootElement;
        Assert.Equal("https://json-schema.org/draft/2020-12/schema", root.GetProperty("$schema").GetString());
        var defs = root.GetProperty("$defs");
        AssertSameNames(typeof(ModelDescriptor), root.GetProperty("properties"));
        AssertSameNames(typeof(ClassDescriptor), defs.GetProperty("class").GetProperty("properties"));
        AssertSameNames(typeof(InputDescriptor), defs.GetProperty("input").GetProperty("properties"));
        AssertSameNames(typeof(SizePolicy), defs.GetProperty("size").GetProperty("properties"));
        AssertSameNames(typeof(OutputDescriptor), defs.GetProperty("output").GetProperty("properties"));
    }

    private static void AssertSameNames(Type record, JsonElement properties)
    {
        var expected = record.GetProperties(BindingFlags.Public | BindingFlags.Instance)
            .Select(p => p.GetCustomAttribute<JsonPropertyNameAttribute>()?.Name).OfType<string>().OrderBy(n => n).ToList();
        var actual = properties.EnumerateObject().Select(p => p.Name).OrderBy(n => n).ToList();
        Assert.Equal(expected, actual);
    }

    internal static string FindRepoFile(string relative)
    {
        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
        {
            string candidate = Path.Combine(dir.FullName, relative);
            if (File.Exists(candidate)) return candidate;
        }
        throw new FileNotFoundException($"{relative} not found above {AppContext.BaseDirectory}");
    }
}
