namespace Strayspot.Service.Batches;

/// <summary>A batch request refused for a reason the client can fix; <see cref="Code"/> is an API error code.</summary>
public sealed class BatchException(string code, string message) : Strayspot.Scoring.CodedException(code, message);

/// <summary>The stable codes of <see cref="BatchException"/>; never rename one.</summary>
public static class BatchErrorCodes
{
    public const string NotFound = "batch-not-found";
    public const string Conflict = "batch-conflict";
    public const string Empty = "batch-empty";
    public const string ArchiveInvalid = "archive-invalid";
    public const string ArchiveEscape = "archive-escape";
    public const string ArchiveTooLarge = "archive-too-large";
    public const string CallbackNotAllowed = "callback-not-allowed";
}
