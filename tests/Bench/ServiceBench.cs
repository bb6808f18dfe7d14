using System.Diagnostics;
using System.Net;
using System.Net.Sockets;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Demo;
using Strayspot.Service.Frames;
using Strayspot.Service.Hosting;
using Strayspot.Service.Inference;

namespace Strayspot.Bench;

/// <summary>
/// The HTTP service on loopback with the demo model and 1024×512 PNG frames: latency and throughput with 1 and 4
/// clients, and the service's overhead over calling the same frame path in process.
/// </summary>
public static class ServiceBench
{
    public static void Run(int runs)
    {
        string root = Directory.CreateTempSubdirectory("strayspot-bench-svc-").FullName;
        try
        {
            string models = Path.Combine(root, "models");
            BundledDemo.Extract(Path.Combine(models, "demo"), Path.Combine(root, "frames"));
            var frames = Enumerable.Range(0, 4).Select(i => DemoPng.Encode(new ApronSceneGenerator(1024, 512).Render(70 + i))).ToArray();

            // In process: decode + the whole frame path, as the endpoint does, without HTTP, with the service's own
            // network setting (the CPU budget's intra-op threads, memory pattern off): otherwise the comparison
            // measures a thread setting, not HTTP.
            using var bundle = LocalModel.Open(Path.Combine(models, "demo"),
                new ParallelSettings { IntraOpThreads = CpuBudget.Current.IntraOpThreads, MemoryPattern = false });
            var decoder = new FrameDecoder();
            int next = 0;
            double InProcess() => Measure.MedianMs(runs, () =>
            {
                using var f = decoder.Decode(frames[next++ % frames.Length]);
                bundle.Runner.Score(bundle.Lease, f, null, (s, _) => s.FrameScore);
            });
            double inProcessBefore = InProcess();

            int port = FreePort();
            var app = ServiceHost.Build(new ServiceHostSettings
            {
                ModelsRoot = models,
                DataRoot = Path.Combine(root, "data"),
                Urls = [$"http://127.0.0.1:{port}"],
                ConsoleLog = false,
                Configuration = new Dictionary<string, string?> { ["Service:MaxQueuedFrames"] = "64" },
            });
            app.StartAsync().GetAwaiter().GetResult();
            try
            {
                using var http = new HttpClient { BaseAddress = new Uri($"http://127.0.0.1:{port}"), Timeout = TimeSpan.FromMinutes(2) };
                for (int i = 0; i < 200 && !http.GetAsync("/readyz").Result.IsSuccessStatusCode; i++) Thread.Sleep(100);
                Post(http, frames[0]);
                Post(http, frames[1]);

                var one = Clients(http, frames, clients: 1, perClient: runs);
                var four = Clients(http, frames, clients: 4, perClient: Math.Max(3, runs / 2));
                // Measured on both sides of the HTTP runs: the lower median is the reference, so warm-up never flatters the service.
                double inProcess = Math.Min(inProcessBefore, InProcess());
                Console.WriteLine();
                Console.WriteLine("| case | p50 | p99 | throughput | note |");
                Console.WriteLine("|---|---|---|---|---|");
                Console.WriteLine($"| in process: decode + frame path, 1024×512 PNG | {inProcess:0.0} ms | | {1000 / inProcess:0.0} frames/s | frame runner, no HTTP |");
                Console.WriteLine($"| HTTP, 1 client | {one.P50:0.0} ms | {one.P99:0.0} ms | {one.Throughput:0.0} frames/s | overhead over in process: {(one.P50 / inProcess - 1) * 100:0}% (target ≤ 15%) |");
                Console.WriteLine($"| HTTP, 4 clients | {four.P50:0.0} ms | {four.P99:0.0} ms | {four.Throughput:0.0} frames/s | {four.Refused} refused with 429 |");
                Console.WriteLine();
                Console.WriteLine($"Peak working set of this process: {Process.GetCurrentProcess().PeakWorkingSet64 / 1_000_000} MB.");
            }
            finally
            {
                app.StopAsync().GetAwaiter().GetResult();
                ((IDisposable)app).Dispose();
            }
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }

    /// <summary>Each client on a thread of its own, so all of them are sending from the first frame on.</summary>
    internal static (double P50, double P99, double Throughput, int Refused) Clients(HttpClient http, byte[][] frames, int clients, int perClient,
        string path = FramesPath)
    {
        var (latencies, refused, seconds) = ClientLatencies(http, frames, clients, perClient, path);
        if (latencies.Count == 0) return (double.NaN, double.NaN, 0, refused);
        latencies.Sort();
        return (Measure.Median(latencies), Percentile99(latencies), latencies.Count / seconds, refused);
    }

    /// <summary>The 99th percentile of sorted latencies (nearest rank).</summary>
    internal static double Percentile99(List<double> sorted) => sorted[Math.Min(sorted.Count - 1, (int)Math.Ceiling(0.99 * sorted.Count) - 1)];

    /// <summary>Latencies of the answered requests (unsorted), refused count and wall seconds of one round of clients.</summary>
    internal static (List<double> Latencies, int Refused, double Seconds) ClientLatencies(HttpClient http, byte[][] frames, int clients, int perClient,
        string path = FramesPath)
    {
        var latencies = new List<double>();
        int refused = 0;
        var clock = Stopwatch.StartNew();
        var threads = Enumerable.Range(0, clients).Select(c => new Thread(() =>
        {
            for (int k = 0; k < perClient; k++)
            {
                long t = Stopwatch.GetTimestamp();
                var status = Post(http, frames[(c + k) % frames.Length], path);
                double ms = Stopwatch.GetElapsedTime(t).TotalMilliseconds;
                lock (latencies)
                {
                    if (status == HttpStatusCode.OK) latencies.Add(ms);
                    else refused++;
                }
            }
        })).ToList();
        threads.ForEach(t => t.Start());
        threads.ForEach(t => t.Join());
        return (latencies, refused, clock.Elapsed.TotalSeconds);
    }

    internal const string FramesPath = "/v1/models/demo/frames";

    internal static HttpStatusCode Post(HttpClient http, byte[] png, string path = FramesPath)
    {
        using var response = PostForAnswer(http, png, path);
        return response.StatusCode;
    }

    /// <summary>One frame as the load clients send it (PNG part, no artifacts); the caller disposes the answer.</summary>
    internal static HttpResponseMessage PostForAnswer(HttpClient http, byte[] png, string path = FramesPath)
    {
        using var form = new MultipartFormDataContent();
        var part = new ByteArrayContent(png);
        part.Headers.ContentType = new("image/png");
        form.Add(part, "frame", "frame.png");
        form.Add(new StringContent("none"), "artifacts");
        return http.PostAsync(path, form).GetAwaiter().GetResult();
    }


    internal static int FreePort()
    {
        using var l = new TcpListener(IPAddress.Loopback, 0);
        l.Start();
        return ((IPEndPoint)l.LocalEndpoint).Port;
    }
}
