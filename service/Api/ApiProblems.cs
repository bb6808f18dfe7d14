using Microsoft.AspNetCore.Http.HttpResults;

namespace Strayspot.Service.Api;

/// <summary>Builds problem+json results carrying a stable <c>code</c>; <c>traceId</c> is added for every problem by the host.</summary>
public static class ApiProblems
{
    public static ProblemHttpResult Create(string code, string detail, IDictionary<string, object?>? extensions = null)
    {
        var row = ErrorCodes.Get(code);
        var ext = new Dictionary<string, object?>(extensions ?? new Dictionary<string, object?>()) { ["code"] = code };
        return TypedResults.Problem(detail: detail, statusCode: row.Status, title: row.Title,
            type: ErrorCodes.TypeUri(code), extensions: ext);
    }

    public static ProblemHttpResult Validation(IDictionary<string, string[]> errors)
    {
        string detail = string.Join(" ", errors.SelectMany(e => e.Value));
        return Create(ErrorCodes.ValidationFailed, detail, new Dictionary<string, object?> { ["errors"] = errors });
    }

    public static ProblemHttpResult ModelNotFound(string model) =>
        Create(ErrorCodes.ModelNotFound, $"No model named '{model}' is installed; GET /v1/models lists the installed ones.");
}
