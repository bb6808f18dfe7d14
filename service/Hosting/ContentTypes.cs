using Microsoft.AspNetCore.StaticFiles;

namespace Strayspot.Service.Hosting;

/// <summary>The content type of a file the service sends, from ASP.NET Core's own extension table.</summary>
public static class ContentTypes
{
    private static readonly FileExtensionContentTypeProvider Provider = new();

    /// <summary>By the file's extension; <c>application/octet-stream</c> for one the table does not know (e.g. <c>.npy</c>).</summary>
    public static string Of(string path) => Provider.TryGetContentType(path, out string? type) ? type : "application/octet-stream";
}
