using System.Collections.Concurrent;
using System.Diagnostics;
using System.Net;
using System.Net.Sockets;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Demo;
using Strayspot.Service.Hosting;

namespace Strayspot.Tests.Service.Hosting;

/// <summary>The real Kestrel server on 127.0.0.1 under many concurrent clients, with the bundled demo model.</summary>
/// <remarks>Alone, because it bounds the process's working set, which tests running beside it would inflate.</remarks>
[Collection(nameof(ProcessEnvironment))]
public sealed class KestrelLoadTests(Xunit.Abstractions.ITestOutputHelper output)
{
    [Fact]
    public async Task Sixteen_clients_get_answers_or_a_retry_after_never_a_server_error_and_memory_stays_bounded()
    {
        string root = Directory.CreateTempSubdirectory("strayspot-load-").FullName;
        try
        {
            BundledDemo.Extract(Path.Combine(root, "models", "demo"), Path.Combine(root, "frames"));
            var frames = Enumerable.Range(0, 4).Select(i => DemoPng.Encode(new ApronSceneGenerator(256, 128).Render(40 + i))).ToArray();
            int port = FreePort();
            await using var app = ServiceHost.Build(new ServiceHostSettings
            {
                ModelsRoot = Path.Combine(root, "models"),
                DataRoot = Path.Combine(root, "data"),
                Urls = [$"http://127.0.0.1:{port}"],
                ConsoleLog = false,
                Configuration = new Dictionary<string, string?>
                {
                    ["Service:MaxConcurrentFrames"] = "2",
                    ["Service:MaxQueuedFrames"] = "4",
                    ["Service:IntraOpThreads"] = "1",
                },
            });
            await app.StartAsync();
            using var http = new HttpClient { BaseAddress = new Uri($"http://127.0.0.1:{port}"), Timeout = TimeSpan.FromSeconds(60) };
            for (int i = 0; i < 100 && !(await http.GetAsync("/readyz")).IsSuccessStatusCode; i++) await Task.Delay(200);

            var statuses = new ConcurrentBag<HttpStatusCode>();
            var missingRetryAfter = new ConcurrentBag<int>();
            long before = Process.GetCurrentProcess().WorkingSet64;
            long peak = before;
            var clients = Enumerable.Range(0, 16).Select(c => Task.Run(async () =>
            {
                for (int k = 0; k < 20; k++)
                {
                    using var form = new MultipartFormDataContent();
                    var part = new ByteArrayContent(frames[(c + k) % frames.Length]);
                    part.Headers.ContentType = new("image/png");
                    form.Add(part, "frame", "frame.png");
                    form.Add(new StringContent("none"), "artifacts");
                    using var response = await http.PostAsync("/v1/models/demo/frames", form);
                    statuses.Add(response.StatusCode);
                    if (response.StatusCode == HttpStatusCode.TooManyRequests && response.Headers.RetryAfter is null)
                        missingRetryAfter.Add(c);
                    Interlocked.Exchange(ref peak, Math.Max(Interlocked.Read(ref peak), Process.GetCurrentProcess().WorkingSet64));
                }
            })).ToArray();
            await Task.WhenAll(clients);
            await app.StopAsync();

            output.WriteLine($"200: {statuses.Count(s => s == HttpStatusCode.OK)}, 429: {statuses.Count(s => s == HttpStatusCode.TooManyRequests)}, peak growth {(peak - before) / 1_000_000} MB");
            Assert.Equal(16 * 20, statuses.Count);
            Assert.DoesNotContain(statuses, s => (int)s >= 500);
            Assert.All(statuses, s => Assert.True(s is HttpStatusCode.OK or HttpStatusCode.TooManyRequests, $"unexpected {s}"));
            Assert.Contains(HttpStatusCode.OK, statuses);
            Assert.Empty(missingRetryAfter);
            // Bounded queue: growth stays far below what 320 frames held at once would need.
            Assert.True(peak - before < 1_000_000_000, $"working set grew by {(peak - before) / 1_000_000} MB");
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }


    private static int FreePort()
    {
        using var l = new TcpListener(IPAddress.Loopback, 0);
        l.Start();
        return ((IPEndPoint)l.LocalEndpoint).Port;
    }
}
