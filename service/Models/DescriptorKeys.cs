using System.Reflection;
using System.Text.Json.Nodes;
using System.Text.Json.Serialization;

namespace Strayspot.Service.Models;

/// <summary>
/// Checks a descriptor's JSON keys against the descriptor's own fields before it is read, so a misspelt key is named
/// with the valid keys and the closest one, in the descriptor's words rather than the runtime's type names.
/// </summary>
public static class DescriptorKeys
{
    /// <summary>One line per unknown key, e.g. <c>input.valueScal: unknown key; did you mean 'valueScale'? …</c>.</summary>
    public static List<string> Unknown(JsonNode? root)
    {
        var problems = new List<string>();
        Walk(root, typeof(ModelDescriptor), "", problems);
        return problems;
    }

    /// <summary>What kind of JSON value a field at <paramref name="jsonPath"/> (like <c>$.input.valueScale</c>) takes, or null.</summary>
    public static string? ExpectedKind(string? jsonPath)
    {
        if (jsonPath is null) return null;
        var type = typeof(ModelDescriptor);
        foreach (string raw in jsonPath.TrimStart('$', '.').Split('.', StringSplitOptions.RemoveEmptyEntries))
        {
            string part = raw.Split('[')[0];
            var property = Fields(type).GetValueOrDefault(part);
            if (property is null) return null;
            type = property.PropertyType;
            if (raw.Contains('[') && ElementType(type) is { } element) type = element;
        }
        return Kind(type);
    }

    private static void Walk(JsonNode? node, Type type, string path, List<string> problems)
    {
        if (node is not JsonObject obj) return;
        var fields = Fields(type);
        foreach (var (key, value) in obj)
        {
            string at = path.Length == 0 ? key : $"{path}.{key}";
            if (!fields.TryGetValue(key, out var property))
            {
                string? near = NearestName.Find(key, fields.Keys);
                problems.Add($"{at}: unknown key.{(near is not null ? $" Did you mean '{near}'?" : "")} Valid keys{(path.Length == 0 ? "" : $" of {path}")}: {string.Join(", ", fields.Keys)}.");
                continue;
            }
            var t = property.PropertyType;
            if (IsOurs(t)) Walk(value, t, at, problems);
            else if (ElementType(t) is { } element && IsOurs(element) && value is JsonArray array)
                for (int i = 0; i < array.Count; i++) Walk(array[i], element, $"{at}[{i}]", problems);
        }
    }

    private static Dictionary<string, PropertyInfo> Fields(Type type) =>
        type.GetProperties(BindingFlags.Public | BindingFlags.Instance)
            .Select(p => (p, name: p.GetCustomAttribute<JsonPropertyNameAttribute>()?.Name))
            .Where(x => x.name is not null)
            .ToDictionary(x => x.name!, x => x.p, StringComparer.Ordinal);

    private static bool IsOurs(Type t) => t.Namespace == typeof(ModelDescriptor).Namespace && t.IsClass && t != typeof(string);

    private static Type? ElementType(Type t) =>
        t.IsArray ? t.GetElementType() : t.IsGenericType && t.GetGenericTypeDefinition() == typeof(List<>) ? t.GetGenericArguments()[0] : null;

    private static string Kind(Type t)
    {
        t = Nullable.GetUnderlyingType(t) ?? t;
        if (t == typeof(string)) return "a string";
        if (t == typeof(bool)) return "true or false";
        if (t == typeof(float) || t == typeof(double)) return "a number";
        if (t == typeof(int) || t == typeof(long)) return "a whole number";
        if (ElementType(t) is { } e) return $"a list of {Kind(e).Replace("a ", "", StringComparison.Ordinal)}s";
        return "an object";
    }
}
