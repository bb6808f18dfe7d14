using System.Net.Sockets;
using System.Text;
using Strayspot.Service.Hosting;
using Xunit.Abstractions;

namespace Strayspot.Tests.Service.Api;

/// <summary>Errors answered over a real Kestrel on 127.0.0.1: what the app sees becomes problem+json.</summary>
public class ServerAnswersTests(ITestOutputHelper output)
{
    private static async Task<(Microsoft.AspNetCore.Builder.WebApplication App, int Port)> StartAsync()
    {
        string root = Path.Combine(Path.GetTempPath(), "strayspot-kestrel-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(Path.Combine(root, "models"));
        TestService.WriteModel(Path.Combine(root, "models"), "apron-a");
        var app = ServiceHost.Build(new ServiceHostSettings
        {
            ModelsRoot = Path.Combine(root, "models"), DataRoot = Path.Combine(root, "data"), ConsoleLog = false, Urls = ["http://127.0.0.1:0"],
            Configuration = new Dictionary<string, string?> { ["Service:MaxRequestBytes"] = "2048" },
        });
        await ServiceHost.StartCheckedAsync(app);
        return (app, new Uri(app.Urls.Single()).Port);
    }

    /// <summary>Sends raw bytes and returns the whole answer (the server closes or the read times out).</summary>
    private static async Task<string> RawAsync(int port, byte[] request)
    {
        using var tcp = new TcpClient();
        await tcp.ConnectAsync("127.0.0.1", port);
        var stream = tcp.GetStream();
        await stream.WriteAsync(request);
        var buffer = new MemoryStream();
        var chunk = new byte[8192];
        using var cts = new CancellationTokenSource(TimeSpan.FromSeconds(5));
        try
        {
            int n;
            while ((n = await stream.ReadAsync(chunk, cts.Token)) > 0)
            {
                buffer.Write(chunk, 0, n);
                string text = Encoding.Latin1.GetString(buffer.ToArray());
                int headEnd = text.IndexOf("\r\n\r\n", StringComparison.Ordinal);
                if (headEnd > 0 && System.Text.RegularExpressions.Regex.Match(text, @"Content-Length: (\d+)", System.Text.RegularExpressions.RegexOptions.IgnoreCase) is { Success: true } m
                    && text.Length >= headEnd + 4 + int.Parse(m.Groups[1].Value)) break;
            }
        }
        catch (OperationCanceledException) { }
        catch (IOException) { }
        return Encoding.Latin1.GetString(buffer.ToArray());
    }

    private static byte[] Ascii(string s) => Encoding.Latin1.GetBytes(s);

    private static string Chunked(string path, string contentType, int bytes) =>
        $"POST {path} HTTP/1.1\r\nHost: x\r\nTransfer-Encoding: chunked\r\nContent-Type: {contentType}\r\n\r\n" +
        $"{bytes:x}\r\n{new string('a', bytes)}\r\n0\r\n\r\n";

    /// <summary>
    /// Kestrel answers these before the app sees the request, with an empty body; the README lists them. If Kestrel
    /// ever answers differently this test says so, and the README must change with it.
    /// </summary>
    [Theory]
    [InlineData("raw NUL in the path", "GET /v1/models/a\0b HTTP/1.1\r\nHost: x\r\n\r\n", 400)]
    [InlineData("encoded NUL in the path", "GET /v1/models/a%00b HTTP/1.1\r\nHost: x\r\n\r\n", 400)]
    [InlineData("malformed method", "G(T /v1/models HTTP/1.1\r\nHost: x\r\n\r\n", 400)]
    [InlineData("no Host header", "GET /v1/models HTTP/1.1\r\n\r\n", 400)]
    [InlineData("request line over 8 KiB", "GET /v1/models/{A20000} HTTP/1.1\r\nHost: x\r\n\r\n", 414)]
    [InlineData("headers over 32 KiB", "GET /v1/models HTTP/1.1\r\nHost: x\r\nX-Big: {A40000}\r\n\r\n", 431)]
    public async Task What_Kestrel_refuses_before_the_app_is_an_empty_answer_with_its_status(string what, string request, int status)
    {
        var (app, port) = await StartAsync();
        await using var _ = app;
        request = request.Replace("{A20000}", new string('a', 20_000)).Replace("{A40000}", new string('a', 40_000));
        string answer = await RawAsync(port, Ascii(request));
        output.WriteLine($"{what}: {answer.Split("\r\n")[0]}");
        Assert.StartsWith($"HTTP/1.1 {status} ", answer);
        Assert.Contains("Content-Length: 0", answer);
    }

    /// <summary>Everything the app sees is answered as problem+json with a code, also when the body breaks mid-way.</summary>
    [Theory]
    [InlineData("malformed chunk in a form", "POST /v1/models/apron-a/logits HTTP/1.1\r\nHost: x\r\nTransfer-Encoding: chunked\r\nContent-Type: multipart/form-data; boundary=b\r\n\r\nzz\r\n", 400, "bad-request")]
    [InlineData("chunked form over the body limit", "{CHUNKED_FORM}", 413, "payload-too-large")]
    [InlineData("chunked JSON over the body limit", "{CHUNKED_JSON}", 413, "payload-too-large")]
    [InlineData("unknown route", "GET /v1/nothing HTTP/1.1\r\nHost: x\r\n\r\n", 404, "not-found")]
    [InlineData("method not allowed", "DELETE /v1/models HTTP/1.1\r\nHost: x\r\n\r\n", 405, "method-not-allowed")]
    [InlineData("declared length over the limit", "POST /v1/batches HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: 999999\r\n\r\n", 413, "payload-too-large")]
    public async Task What_the_app_sees_is_answered_as_problem_json(string what, string request, int status, string code)
    {
        var (app, port) = await StartAsync();
        await using var _ = app;
        request = request
            .Replace("{CHUNKED_FORM}", Chunked("/v1/models/apron-a/logits", "multipart/form-data; boundary=b", 5000))
            .Replace("{CHUNKED_JSON}", Chunked("/v1/models/apron-a/evaluations", "application/json", 5000));
        string answer = await RawAsync(port, Ascii(request));
        output.WriteLine($"{what}: {(answer.Length > 400 ? answer[..400] : answer)}");
        Assert.StartsWith($"HTTP/1.1 {status} ", answer);
        Assert.Contains("Content-Type: application/problem+json", answer);
        Assert.Contains($"\"code\":\"{code}\"", answer);
    }
}
