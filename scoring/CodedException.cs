namespace Strayspot.Scoring;

/// <summary>
/// A refusal with a stable <see cref="Code"/>: every domain (scoring, model, frame, batch, review, path, job) derives its
/// own exception from this and keeps its codes beside it. The service maps the code to an HTTP status in one table;
/// the command line prints it. Never rename a code: clients switch on them.
/// </summary>
public abstract class CodedException(string code, string message, Exception? inner = null) : Exception(message, inner)
{
    public string Code { get; } = code;
}
