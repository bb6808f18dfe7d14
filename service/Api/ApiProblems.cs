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

/// <summary>Reading a scoring upload's multipart form, with the same refusals on every endpoint.</summary>
public static class UploadForm
{
    /// <summary>The form, or the problem to answer: not multipart (415), over a limit (413) or malformed (400).</summary>
    public static async Task<(IFormCollection? Form, ProblemHttpResult? Problem)> ReadAsync(HttpRequest request, string filePart,
        string what, CancellationToken ct)
    {
        if (!request.HasFormContentType)
            return (null, ApiProblems.Create(ErrorCodes.UnsupportedMediaType,
                $"Send multipart/form-data with the {what} as file part '{filePart}'; got '{request.ContentType ?? "no content type"}'."));
        try
        {
            return (await request.ReadFormAsync(ct), null);
        }
        catch (InvalidDataException e)
        {
            // The multipart reader's own limits (body length, section count) and malformed boundaries land here.
            bool tooLarge = e.Message.Contains("limit", StringComparison.OrdinalIgnoreCase);
            return (null, ApiProblems.Create(tooLarge ? ErrorCodes.PayloadTooLarge : ErrorCodes.BadRequest, $"The form could not be read: {e.Message}"));
        }
    }
}
