using System.Net.Http.Headers;
using System.Text.Json;
using Strayspot.Service.Reports;

namespace Strayspot.Service.Api;

/// <summary>
/// The scored frame and its artifacts in one <c>multipart/mixed</c> answer: first the JSON, then one part per
/// artifact file with its name, for clients that would rather not fetch links.
/// </summary>
public sealed class InlineArtifactsResult(ScoredFrame answer, string? folder) : IResult
{
    public async Task ExecuteAsync(HttpContext http)
    {
        using var content = new MultipartContent("mixed", "strayspot-" + answer.FrameId);
        var json = new ByteArrayContent(JsonSerializer.SerializeToUtf8Bytes(answer, FrameReport.JsonOptions));
        json.Headers.ContentType = new MediaTypeHeaderValue("application/json");
        content.Add(json);
        var streams = new List<Stream>();
        try
        {
            foreach (var (name, _) in answer.Report.Artifacts ?? [])
            {
                if (folder is null || !Rendering.ArtifactWriter.Files.TryGetValue(name, out string? file)) continue;
                var stream = File.OpenRead(Path.Combine(folder, file));
                streams.Add(stream);
                var part = new StreamContent(stream);
                part.Headers.ContentType = new MediaTypeHeaderValue(Hosting.ContentTypes.Of(file));
                part.Headers.ContentDisposition = new ContentDispositionHeaderValue("attachment") { Name = name, FileName = file };
                content.Add(part);
            }
            http.Response.StatusCode = StatusCodes.Status200OK;
            http.Response.ContentType = content.Headers.ContentType!.ToString();
            await content.CopyToAsync(http.Response.Body, http.RequestAborted);
        }
        finally
        {
            foreach (var s in streams) await s.DisposeAsync();
        }
    }
}
