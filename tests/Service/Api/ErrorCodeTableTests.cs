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

    [Fact]
    public void Codes_are_unique_and_lower_kebab_case()
    {
        var codes = ErrorCodes.All.Select(r => r.Code).ToList();
        Assert.Equal(codes.Count, codes.Distinct().Count());
        Assert.All(codes, c => Assert.Matches("^[a-z]+(-[a-z0-9]+)*$", c));
    }
}
