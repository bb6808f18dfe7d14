namespace Strayspot.Service.Batches;

/// <summary>A batch request refused for a reason the client can fix; <see cref="Code"/> is an API error code.</summary>
public sealed class BatchException(string code, string message) : Exception(message)
{
    public string Code { get; } = code;
}
