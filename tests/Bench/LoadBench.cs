using System.Diagnostics;
using Microsoft.ML.OnnxRuntime;
using Strayspot.Service.Demo;
using Strayspot.Service.Frames;
using Strayspot.Service.Hosting;
using Strayspot.Service.Models;

namespace Strayspot.Bench;

/// <summary>
/// Throughput and memory against the network's own limit, demo model, 1024×512 PNG frames: ONNX Runtime alone on a
/// pre-made tensor (thread settings, frames at once, arena and memory-pattern settings), then the HTTP service at
/// 1, 2, 4 and 16 clients with resident memory idle, at the peak of the 16-client load and after it.
/// </summary>
public static class LoadBench
{
    /// <param name="framesAtOnce">Service:MaxConcurrentFrames for the service part; null keeps the service's default.</param>
    public static void Run(int runs, int? framesAtOnce = null)
    {
        string root = Directory.CreateTempSubdirectory("strayspot-bench-load-").FullName;
        try
        {
            string models = Path.Combine(root, "models");
            var (folder, _) = BundledDemo.Extract(Path.Combine(models, "demo"), Path.Combine(root, "frames"));
            var frames = Enumerable.Range(0, 4).Select(i => DemoPng.Encode(new ApronSceneGenerator(1024, 512).Render(70 + i))).ToArray();
            var budget = CpuBudget.Current;
            Console.WriteLine();
            Console.WriteLine($"CPU budget: {budget.Cpus:0.##} CPUs ({budget.Source}) → {budget.IntraOpThreads} intra-op threads, {budget.FramesInFlight} frame(s) in flight.");

            // The network alone: the demo model's own input tensor for one 1024×512 frame, made once.
            float[] tensor;
            long[] shape;
            using (var model = SegmentationModel.LoadFolder(folder, new ModelRuntimeOptions { WarmUp = false }))
            {
                var decoder = new FrameDecoder();
                using var frame = decoder.Decode(frames[0]);
                var input = new FramePreprocessor(model.Descriptor.Input).Prepare(frame);
                tensor = input.Data.ToArray();
                shape = input.Shape;
            }
            string onnx = Path.Combine(folder, SegmentationModel.ModelFileName);

            Console.WriteLine();
            Console.WriteLine("| network alone (ONNX Runtime, pre-made 1024×512 tensor) | median per frame | throughput | resident memory added |");
            Console.WriteLine("|---|---|---|---|");
            double best = 0;
            string bestName = "";
            var settings = new List<(string Name, int Threads, int AtOnce, bool Arena, bool Pattern)>();
            for (int t = 1; t <= Environment.ProcessorCount; t *= 2) settings.Add(($"{t} intra-op thread(s), 1 frame at once", t, 1, true, true));
            if (Environment.ProcessorCount >= 2) settings.Add(($"1 intra-op thread, {Environment.ProcessorCount} frames at once", 1, Environment.ProcessorCount, true, true));
            int cores = Environment.ProcessorCount;
            settings.Add(($"{cores} threads, arena off", cores, 1, false, true));
            settings.Add(($"{cores} threads, memory pattern off", cores, 1, true, false));
            settings.Add(($"{cores} threads, arena and memory pattern off", cores, 1, false, false));
            foreach (var s in settings)
            {
                var (ms, fps, added) = NetworkAlone(onnx, tensor, shape, s.Threads, s.AtOnce, s.Arena, s.Pattern, runs);
                if (fps > best) { best = fps; bestName = s.Name; }
                Console.WriteLine($"| {s.Name} | {ms:0.0} ms | {fps:0.0} frames/s | {added / 1e6:0} MB |");
            }

            Service(models, frames, runs, best, bestName, framesAtOnce);
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }

    private static (double Ms, double Fps, long Added) NetworkAlone(string onnx, float[] tensor, long[] shape, int threads, int atOnce,
        bool arena, bool pattern, int runs)
    {
        GC.Collect();
        GC.WaitForPendingFinalizers();
        long before = Resident();
        using var so = new SessionOptions
        {
            IntraOpNumThreads = threads,
            InterOpNumThreads = 1,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
            EnableCpuMemArena = arena,
            EnableMemoryPattern = pattern,
        };
        so.AddSessionConfigEntry("session.intra_op.allow_spinning", "0");
        using var session = new InferenceSession(onnx, so);
        string name = session.InputMetadata.Keys.First();
        using var value = OrtValue.CreateTensorValueFromMemory(tensor, shape);
        var inputs = new Dictionary<string, OrtValue> { [name] = value };
        using var runOptions = new RunOptions();
        void One() { using var outputs = session.Run(runOptions, inputs, session.OutputNames); }
        One(); One();
        double median = Measure.MedianMs(runs, One);
        int total = Math.Max(runs, 2 * atOnce);
        int next = 0;
        var clock = Stopwatch.StartNew();
        Parallel.For(0, atOnce, new ParallelOptions { MaxDegreeOfParallelism = atOnce }, _ =>
        {
            while (Interlocked.Increment(ref next) <= total) One();
        });
        double fps = total / clock.Elapsed.TotalSeconds;
        long added = Resident() - before;
        return (median, fps, added);
    }

    private static void Service(string models, byte[][] frames, int runs, double networkFps, string networkSetting, int? framesAtOnce)
    {
        int port = ServiceBench.FreePort();
        var app = ServiceHost.Build(new ServiceHostSettings
        {
            ModelsRoot = models,
            DataRoot = Path.Combine(Path.GetDirectoryName(models)!, "data"),
            Urls = [$"http://127.0.0.1:{port}"],
            ConsoleLog = false,
            Configuration = new Dictionary<string, string?>
            {
                ["Service:MaxQueuedFrames"] = "64",
                ["Service:MaxConcurrentFrames"] = (framesAtOnce ?? new ServiceOptions().MaxConcurrentFrames).ToString(),
            },
        });
        app.StartAsync().GetAwaiter().GetResult();
        try
        {
            using var http = new HttpClient { BaseAddress = new Uri($"http://127.0.0.1:{port}"), Timeout = TimeSpan.FromMinutes(5) };
            for (int i = 0; i < 300 && !http.GetAsync("/readyz").Result.IsSuccessStatusCode; i++) Thread.Sleep(100);
            ServiceBench.Post(http, frames[0]);
            ServiceBench.Post(http, frames[1]);
            GC.Collect();
            GC.WaitForPendingFinalizers();
            long idle = Resident();
            long idleManaged = GC.GetTotalMemory(false);

            Console.WriteLine();
            Console.WriteLine($"Service: Service:MaxConcurrentFrames = {framesAtOnce ?? new ServiceOptions().MaxConcurrentFrames}, intra-op threads {CpuBudget.Current.IntraOpThreads}.");
            Console.WriteLine();
            Console.WriteLine("| HTTP service, 1024×512 PNG, no artifacts | p50 | p99 | p99 / p50 | throughput | service / network alone |");
            Console.WriteLine("|---|---|---|---|---|---|");
            long peak = idle;
            long peakManaged = 0;
            foreach (int clients in new[] { 1, 2, 4, 16 })
            {
                using var sampler = new Timer(_ =>
                {
                    long r = Resident();
                    if (r > Interlocked.Read(ref peak)) { Interlocked.Exchange(ref peak, r); Interlocked.Exchange(ref peakManaged, GC.GetTotalMemory(false)); }
                }, null, 0, 50);
                int perClient = clients == 16 ? Math.Max(3, runs / 3) : Math.Max(4, runs * 2 / clients);
                var (p50, p99, fps, refused) = ServiceBench.Clients(http, frames, clients, perClient);
                Console.WriteLine($"| {clients} client(s) × {perClient} frames | {p50:0} ms | {p99:0} ms | {p99 / p50:0.0} | {fps:0.0} frames/s{(refused > 0 ? $", {refused} refused" : "")} | {fps / networkFps:0.00} |");
            }
            GC.Collect();
            GC.WaitForPendingFinalizers();
            long after = Resident();
            Console.WriteLine();
            Console.WriteLine($"Network alone, best setting: {networkFps:0.0} frames/s ({networkSetting}).");
            Console.WriteLine();
            Console.WriteLine("| resident memory (this process: service + load clients) | MB | managed heap, MB | native (ONNX Runtime arena, native buffers, code), MB |");
            Console.WriteLine("|---|---|---|---|");
            Console.WriteLine($"| idle, after two warm-up frames | {idle / 1e6:0} | {idleManaged / 1e6:0} | {(idle - idleManaged) / 1e6:0} |");
            Console.WriteLine($"| peak under load (sampled every 50 ms) | {peak / 1e6:0} | {peakManaged / 1e6:0} | {(peak - peakManaged) / 1e6:0} |");
            Console.WriteLine($"| after the load and a full GC | {after / 1e6:0} | {GC.GetTotalMemory(false) / 1e6:0} | {(after - GC.GetTotalMemory(false)) / 1e6:0} |");
            Console.WriteLine();
            Console.WriteLine($"Peak above idle: {(peak - idle) / 1e6:0} MB (goal ≤ 400 MB).");
        }
        finally
        {
            app.StopAsync().GetAwaiter().GetResult();
            ((IDisposable)app).Dispose();
        }
    }

    private static long Resident()
    {
        using var p = Process.GetCurrentProcess();
        return p.WorkingSet64;
    }
}
