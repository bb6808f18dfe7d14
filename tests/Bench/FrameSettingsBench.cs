using System.Diagnostics;
using Microsoft.ML.OnnxRuntime;
using Strayspot.Service.Demo;
using Strayspot.Service.Hosting;
using Strayspot.Service.Models;

namespace Strayspot.Bench;

/// <summary>
/// <c>frame-settings</c>: which split of the cores between frames in flight and intra-op threads gives the most
/// throughput. Every setting gets its own service in this process (demo model, 1024×512 PNG, no artifacts) and
/// the network alone gets its two best settings; then rounds at 1, 2, 4 and 16 clients alternate between all of
/// them, so a busy neighbour slows every setting alike. Medians over the rounds, as ratios to the best network-alone
/// throughput of the same rounds.
/// </summary>
public static class FrameSettingsBench
{
    private sealed record Setting(string Name, int Frames, int Threads, int NetworkRuns, int LoneThreads = 0);

    public static void Run(int runs)
    {
        string root = Directory.CreateTempSubdirectory("strayspot-bench-settings-").FullName;
        var apps = new List<(Setting Setting, Microsoft.AspNetCore.Builder.WebApplication App, HttpClient Http)>();
        try
        {
            string models = Path.Combine(root, "models");
            var (folder, _) = BundledDemo.Extract(Path.Combine(models, "demo"), Path.Combine(root, "frames"));
            var frames = Enumerable.Range(0, 4).Select(i => DemoPng.Encode(new ApronSceneGenerator(1024, 512).Render(70 + i))).ToArray();
            int cores = Environment.ProcessorCount;
            var settings = new List<Setting>
            {
                new($"1 frame in flight, {cores} intra-op threads", 1, cores, 0),
                new($"2 frames in flight, {Math.Max(1, cores / 2)} intra-op thread(s) each", 2, Math.Max(1, cores / 2), 0),
                new($"2 frames in flight, {cores} intra-op threads, 1 network run at once", 2, cores, 1),
                new($"2 frames in flight, {Math.Max(1, cores / 2)} intra-op thread(s) each, a lone network run on {cores}", 2, Math.Max(1, cores / 2), 0, cores),
            };
            foreach (var s in settings)
            {
                int port = ServiceBench.FreePort();
                var app = ServiceHost.Build(new ServiceHostSettings
                {
                    ModelsRoot = models,
                    DataRoot = Path.Combine(root, "data-" + port),
                    Urls = [$"http://127.0.0.1:{port}"],
                    ConsoleLog = false,
                    Configuration = new Dictionary<string, string?>
                    {
                        ["Service:MaxQueuedFrames"] = "64",
                        ["Service:MaxConcurrentFrames"] = s.Frames.ToString(),
                        ["Service:IntraOpThreads"] = s.Threads.ToString(),
                        ["Service:NetworkRunsAtOnce"] = s.NetworkRuns.ToString(),
                        ["Service:LoneRunThreads"] = s.LoneThreads.ToString(),
                    },
                });
                app.StartAsync().GetAwaiter().GetResult();
                var http = new HttpClient { BaseAddress = new Uri($"http://127.0.0.1:{port}"), Timeout = TimeSpan.FromMinutes(5) };
                apps.Add((s, app, http));
                for (int i = 0; i < 300 && !http.GetAsync("/readyz").Result.IsSuccessStatusCode; i++) Thread.Sleep(100);
                ServiceBench.Post(http, frames[0]);
                ServiceBench.Post(http, frames[1]);
            }

            // The network alone on the demo model's own tensor, in the two settings that win on 2 cores.
            float[] tensor;
            long[] shape;
            using (var model = SegmentationModel.LoadFolder(folder, new ModelRuntimeOptions { WarmUp = false }))
            {
                using var frame = new Strayspot.Service.Frames.FrameDecoder().Decode(frames[0]);
                var input = new Strayspot.Service.Frames.FramePreprocessor(model.Descriptor.Input).Prepare(frame);
                tensor = input.Data.ToArray();
                shape = input.Shape;
            }
            string onnx = Path.Combine(folder, SegmentationModel.ModelFileName);
            var alone = new List<(string Name, InferenceSession Session, int AtOnce)>();
            foreach (var (threads, atOnce) in new[] { (cores, 1), (1, Math.Min(2, cores)) })
            {
                using var so = new SessionOptions { IntraOpNumThreads = threads, InterOpNumThreads = 1, ExecutionMode = ExecutionMode.ORT_SEQUENTIAL };
                so.AddSessionConfigEntry("session.intra_op.allow_spinning", "0");
                alone.Add(($"network alone, {threads} intra-op thread(s), {atOnce} at once", new InferenceSession(onnx, so), atOnce));
            }
            using var value = OrtValue.CreateTensorValueFromMemory(tensor, shape);

            int rounds = Math.Max(3, runs / 5);
            var results = new Dictionary<(string, int), List<double>>();
            int[] clientCounts = [1, 2, 4, 16];
            for (int r = 0; r < rounds; r++)
                foreach (int clients in clientCounts)
                {
                    foreach (var (name, session, atOnce) in alone)
                        Add(results, (name, clients), AloneFps(session, value, atOnce, 20));
                    int perClient = clients == 16 ? 2 : Math.Max(2, 16 / clients);
                    foreach (var (s, _, http) in apps)
                        Add(results, (s.Name, clients), ServiceBench.Clients(http, frames, clients, perClient).Throughput);
                }
            foreach (var a in alone) a.Session.Dispose();

            Console.WriteLine();
            Console.WriteLine($"Frame settings, {rounds} alternating rounds, median frames/s (ratio to the best network-alone setting of the same rounds):");
            Console.WriteLine();
            Console.WriteLine("| setting | " + string.Join(" | ", clientCounts.Select(c => $"{c} client(s)")) + " |");
            Console.WriteLine("|---|" + string.Join("", clientCounts.Select(_ => "---|")));
            var best = clientCounts.ToDictionary(c => c, c => alone.Max(a => Measure.Median(results[(a.Name, c)])));
            foreach (string name in alone.Select(a => a.Name).Concat(settings.Select(s => s.Name)))
                Console.WriteLine($"| {name} | " + string.Join(" | ", clientCounts.Select(c =>
                {
                    double m = Measure.Median(results[(name, c)]);
                    return $"{m:0.0} ({m / best[c]:0.00})";
                })) + " |");
        }
        finally
        {
            foreach (var (_, app, http) in apps)
            {
                http.Dispose();
                app.StopAsync().GetAwaiter().GetResult();
                ((IDisposable)app).Dispose();
            }
            Directory.Delete(root, recursive: true);
        }
    }

    private static void Add(Dictionary<(string, int), List<double>> results, (string, int) key, double value)
    {
        if (!results.TryGetValue(key, out var list)) results[key] = list = [];
        list.Add(value);
    }

    private static double AloneFps(InferenceSession session, OrtValue value, int atOnce, int total)
    {
        string input = session.InputMetadata.Keys.First();
        var inputs = new Dictionary<string, OrtValue> { [input] = value };
        using var runOptions = new RunOptions();
        int next = 0;
        var clock = Stopwatch.StartNew();
        Parallel.For(0, atOnce, new ParallelOptions { MaxDegreeOfParallelism = atOnce }, _ =>
        {
            while (Interlocked.Increment(ref next) <= total) { using var o = session.Run(runOptions, inputs, session.OutputNames); }
        });
        return total / clock.Elapsed.TotalSeconds;
    }
}
