using System.Collections.Frozen;
using System.Security.Cryptography;

namespace Strayspot.Service.Review;

/// <summary>
/// Serves the review page's three files from the executable. They hold no data: the page asks the API for
/// everything, with the same API key as any client, so the files themselves are served without one.
/// </summary>
public static class ReviewPage
{
    public const string Path = "/review";

    private sealed record PageFile(byte[] Bytes, string ContentType, string ETag);

    private static readonly FrozenDictionary<string, PageFile> Files = Load();

    // The page runs its own script only and talks to its own origin; images come from blob: URLs the page makes.
    private const string ContentSecurityPolicy =
        "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' blob: data:; connect-src 'self'; " +
        "form-action 'none'; frame-ancestors 'none'; base-uri 'none'";

    public static void Map(IEndpointRouteBuilder app)
    {
        app.MapGet(Path + "/{file?}", (string? file, HttpContext http) =>
            {
                // Routing treats /review and /review/ alike; the page's relative links need the slash.
                if (string.IsNullOrEmpty(file) && http.Request.Path.Value?.EndsWith('/') != true)
                    return Results.Redirect(Path + "/");
                if (!Files.TryGetValue(string.IsNullOrEmpty(file) ? "index.html" : file, out var page))
                    return Results.NotFound();
                var headers = http.Response.Headers;
                headers.ContentSecurityPolicy = ContentSecurityPolicy;
                headers.XContentTypeOptions = "nosniff";
                headers["Referrer-Policy"] = "no-referrer";
                // Revalidated every time, so an upgraded service never runs a cached older script against a newer API.
                headers.CacheControl = "no-cache";
                headers.ETag = page.ETag;
                if (http.Request.Headers.IfNoneMatch == page.ETag) return Results.StatusCode(StatusCodes.Status304NotModified);
                return Results.Bytes(page.Bytes, page.ContentType);
            })
            .AllowAnonymous()
            .ExcludeFromDescription();
    }

    private static FrozenDictionary<string, PageFile> Load()
    {
        var assembly = typeof(ReviewPage).Assembly;
        var files = new Dictionary<string, PageFile>(StringComparer.Ordinal);
        foreach (string name in assembly.GetManifestResourceNames())
        {
            if (!name.StartsWith("review/", StringComparison.Ordinal)) continue;
            using var stream = assembly.GetManifestResourceStream(name)!;
            using var buffer = new MemoryStream();
            stream.CopyTo(buffer);
            byte[] bytes = buffer.ToArray();
            string file = name["review/".Length..];
            string type = System.IO.Path.GetExtension(file) switch
            {
                ".html" => "text/html; charset=utf-8",
                ".css" => "text/css; charset=utf-8",
                ".js" => "text/javascript; charset=utf-8",
                _ => "application/octet-stream",
            };
            files[file] = new PageFile(bytes, type, "\"" + Convert.ToHexStringLower(SHA256.HashData(bytes))[..16] + "\"");
        }
        return files.ToFrozenDictionary(StringComparer.Ordinal);
    }
}
