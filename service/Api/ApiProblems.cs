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

    /// <summary>A model that failed to load: a stale calibration keeps its own code (422, the user recalibrates), anything else is 503.</summary>
    public static ProblemHttpResult Unusable(Hosting.CatalogEntry entry) =>
        Create(UnusableCode(entry), $"Model '{entry.Name}' cannot be used: {entry.Error}");

    public static string UnusableCode(Hosting.CatalogEntry entry) =>
        entry.ErrorCode == Models.ModelErrorCodes.CalibrationModelMismatch ? entry.ErrorCode : ErrorCodes.ModelUnavailable;
}

/// <summary>Reading an uploaded multipart form, with the same refusals on every endpoint that takes one.</summary>
public static class UploadForm
{
    /// <summary>
    /// The form, or the problem to answer: not multipart (415), over a limit (413), malformed or cut short (400
    /// <c>form-invalid</c>), or holding a part or field it should not: unknown, repeated, or the file part missing
    /// (400 <c>validation-failed</c>). A repeated part is refused, never resolved by taking the first.
    /// </summary>
    public static async Task<(IFormCollection? Form, ProblemHttpResult? Problem)> ReadAsync(HttpRequest request, string filePart,
        string what, IReadOnlyCollection<string> fields, CancellationToken ct)
    {
        if (!request.HasFormContentType)
            return (null, ApiProblems.Create(ErrorCodes.UnsupportedMediaType,
                $"Send multipart/form-data with the {what} as file part '{filePart}'; got '{request.ContentType ?? "no content type"}'."));
        IFormCollection form;
        try
        {
            form = await request.ReadFormAsync(ct);
        }
        catch (BadHttpRequestException e)
        {
            // The server's own limits (body size) while the form is read.
            return (null, ApiProblems.Create(ErrorCodes.ForStatus(e.StatusCode), $"The form could not be read: {e.Message}"));
        }
        catch (InvalidDataException e)
        {
            // The multipart reader's own limits (body length, section count) and malformed boundaries land here.
            bool tooLarge = e.Message.Contains("limit", StringComparison.OrdinalIgnoreCase);
            return (null, ApiProblems.Create(tooLarge ? ErrorCodes.PayloadTooLarge : ErrorCodes.FormInvalid, $"The form could not be read: {e.Message}"));
        }
        catch (IOException e) when (!ct.IsCancellationRequested)
        {
            // A body that ends before the closing boundary: the client's fault, not the server's.
            return (null, ApiProblems.Create(ErrorCodes.FormInvalid,
                $"The multipart body ends before its closing boundary (truncated upload?): {e.Message}"));
        }

        var errors = Check(form, filePart, what, fields, requireFile: true);
        return errors.Count > 0 ? (null, ApiProblems.Validation(errors)) : (form, null);
    }

    /// <summary>Unknown or repeated fields, unknown, repeated or missing file parts, by name.</summary>
    public static Dictionary<string, string[]> Check(IFormCollection form, string filePart, string what, IReadOnlyCollection<string> fields,
        bool requireFile)
    {
        var errors = new Dictionary<string, string[]>(StringComparer.Ordinal);
        foreach (string key in form.Keys)
        {
            if (!fields.Contains(key, StringComparer.Ordinal))
                errors[key] = [$"'{key}' is not a field of this endpoint; the fields are {filePart} (file){(fields.Count > 0 ? ", " : "")}{string.Join(", ", fields)}."];
            else if (form[key].Count > 1)
                errors[key] = [$"'{key}' is given {form[key].Count} times; give it once."];
        }
        int parts = 0;
        foreach (var file in form.Files)
        {
            if (file.Name == filePart) parts++;
            else errors[file.Name] = [$"File part '{file.Name}' is not expected; send the {what} as file part '{filePart}'."];
        }
        if (parts > 1) errors[filePart] = [$"File part '{filePart}' is given {parts} times; send one {what} per request."];
        else if (parts == 0 && requireFile && !errors.ContainsKey(filePart)) errors[filePart] = [$"The form has no file part '{filePart}' ({what})."];
        return errors;
    }
}
