using Microsoft.AspNetCore.Diagnostics;
using Strayspot.Scoring.Logits;
using Strayspot.Service.Api;

namespace Strayspot.Service.Hosting;

/// <summary>The frame did not get a slot and a result within the request budget.</summary>
public sealed class FrameTimeoutException(string message) : Exception(message);

/// <summary>
/// Turns the exceptions our code raises on bad input (every domain's <see cref="Strayspot.Scoring.CodedException"/>)
/// into problem+json with their stable code and the status from <see cref="ErrorCodes"/>. Anything else
/// falls through to the default handler: a 500 <c>internal-error</c> problem, logged with its stack.
/// </summary>
public sealed class ApiExceptionHandler(IProblemDetailsService problems, ILogger<ApiExceptionHandler> log,
    Microsoft.Extensions.Options.IOptions<ServiceOptions> options) : IExceptionHandler
{
    public async ValueTask<bool> TryHandleAsync(HttpContext http, Exception exception, CancellationToken ct)
    {
        (string code, string detail)? mapped = exception switch
        {
            Strayspot.Scoring.CodedException e => (e.Code, e.Message),
            Store.StoreUnavailableException e => (ErrorCodes.NotReady, e.Message), // 503: the database is away, try again
            FrameTimeoutException e => (ErrorCodes.Timeout, e.Message),
            QueueFullException e => (ErrorCodes.QueueFull, e.Message),
            BadHttpRequestException e => (ErrorCodes.ForStatus(e.StatusCode), e.Message),
            _ => null,
        };
        if (mapped is not { } m) return false;
        var o = options.Value;
        string detail = ClientPaths.Relative(m.detail, o.DataRoot, o.ModelsRoot);

        var row = ErrorCodes.Get(m.code);
        // Input errors are the client's business: one line at Information, no stack trace.
        log.LogInformation("Request refused with {Status} {Code}: {Detail}", row.Status, m.code, m.detail);
        http.Response.StatusCode = row.Status;
        if (exception is QueueFullException full)
            http.Response.Headers.RetryAfter = full.RetryAfterSeconds.ToString(System.Globalization.CultureInfo.InvariantCulture);
        return await problems.TryWriteAsync(new ProblemDetailsContext
        {
            HttpContext = http,
            Exception = exception,
            ProblemDetails =
            {
                Status = row.Status, Title = row.Title, Detail = detail, Type = ErrorCodes.TypeUri(m.code),
                Extensions = { ["code"] = m.code },
            },
        });
    }
}
