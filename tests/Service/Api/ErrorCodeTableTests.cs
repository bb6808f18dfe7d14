using System.Reflection;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Api;
using Strayspot.Service.Models;

namespace Strayspot.Tests.Service.Api;

public class ErrorCodeTableTests
{
    private static IEnumerable<string> Constants(Type t) =>
        t.GetFields(BindingFlags.Public | BindingFlags.Static).Where(f => f.IsLiteral).Select(f => (string)f.GetRawConstantValue()!);

    [Fact]
    public void Every_code_the_libraries_raise_has_a_row_with_a_client_or_server_status()
    {
        foreach (string code in Constants(typeof(ScoringErrorCodes)).Concat(Constants(typeof(ModelErrorCodes))).Concat(Constants(typeof(Strayspot.Service.Recordings.RecordingErrorCodes))).Concat(Constants(typeof(ErrorCodes))))
        {
            Assert.True(ErrorCodes.TryGet(code, out var row), $"no row for '{code}'");
            Assert.InRange(row.Status, 400, 599);
        }
    }

    /// <summary>Every domain's codes (each <c>*ErrorCodes</c> class beside its exception) have a row in the one table.</summary>
    [Fact]
    public void Every_domain_code_table_is_mapped_to_a_status()
    {
        var tables = typeof(Strayspot.Scoring.CodedException).Assembly.GetTypes()
            .Concat(typeof(ErrorCodes).Assembly.GetTypes())
            .Where(t => t.IsClass && t.IsAbstract && t.IsSealed && t.Name.EndsWith("ErrorCodes", StringComparison.Ordinal))
            .ToList();
        Assert.Contains(tables, t => t.Name == "FrameErrorCodes");
        Assert.Contains(tables, t => t.Name == "BatchErrorCodes");
        Assert.Contains(tables, t => t.Name == "ReviewErrorCodes");
        Assert.Contains(tables, t => t.Name == "PathErrorCodes");
        Assert.Contains(tables, t => t.Name == "JobErrorCodes");
        foreach (var t in tables)
        foreach (string code in Constants(t))
        {
            Assert.True(ErrorCodes.TryGet(code, out var row), $"{t.Name}: no row for '{code}'");
            Assert.InRange(row.Status, 400, 599);
        }
    }

    [Fact]
    public void Every_domain_exception_carries_a_code_from_the_one_base()
    {
        var coded = typeof(ErrorCodes).Assembly.GetTypes().Concat(typeof(Strayspot.Scoring.CodedException).Assembly.GetTypes())
            .Where(t => typeof(Exception).IsAssignableFrom(t) && t.Name is "ScoringInputException" or "ModelException" or "FrameException"
                or "BatchException" or "ReviewException" or "UnsafePathException" or "PathException")
            .ToList();
        Assert.Equal(7, coded.Count);
        Assert.All(coded, t => Assert.True(typeof(Strayspot.Scoring.CodedException).IsAssignableFrom(t), t.Name));
    }

    [Fact]
    public void Codes_are_unique_and_lower_kebab_case()
    {
        var codes = ErrorCodes.All.Select(r => r.Code).ToList();
        Assert.Equal(codes.Count, codes.Distinct().Count());
        Assert.All(codes, c => Assert.Matches("^[a-z]+(-[a-z0-9]+)*$", c));
    }
}
