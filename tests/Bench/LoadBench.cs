using System.Diagnostics;
using System.Diagnostics.Metrics;
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
    /// <summary>What the goals summary needs from one run.</summary>
    public sealed record Result(double NetworkFps, string NetworkSetting, List<(int Clients, double P50, double P99, double Fps)> Service,
        long IdleBytes, long PeakBytes);

    /// <param name="framesAtOnce">Service:MaxConcurrentFrames for the service part; null keeps the service's default.</param>
    /// <param name="memoryPattern">Service:OnnxMemoryPattern for the service part.</param>
    /// <param name="networkRuns">Service:NetworkRunsAtOnce for the service part; null keeps the service's default.</param>
    /// <param name="intraOp">Service:IntraOpThreads for the service part; null keeps the CPU budget's.</param>
    public static Result Run(int runs, int? framesAtOnce = null, bool memoryPattern = false, int? networkRuns = null, int? intraOp = null)
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
            long sessionBytes = 0;
            var settings = new List<(string Name, int Threads, int AtOnce, bool Arena, bool Pattern)>();
            for (int t = 1; t <= Environment.ProcessorCount; t *= 2)
            {
                settings.Add(($"{t} intra-op thread(s), 1 frame at once", t, 1, true, true));
                settings.Add(($"{t} intra-op thread(s), 1 frame at once, memory pattern off", t, 1, true, false));
            }
            if (Environment.ProcessorCount >= 2) settings.Add(($"1 intra-op thread, {Environment.ProcessorCount} frames at once", 1, Environment.ProcessorCount, true, true));
            int cores = Environment.ProcessorCount;
            settings.Add(($"{cores} threads, arena off", cores, 1, false, true));
            settings.Add(($"{cores} threads, arena and memory pattern off", cores, 1, false, false));
            foreach (var s in settings)
            {
                var (ms, fps, added) = NetworkAlone(onnx, tensor, shape, s.Threads, s.AtOnce, s.Arena, s.Pattern, runs);
                if (fps > best) { best = fps; bestName = s.Name; }
                // The service's own setting: what one session holds, for the memory split.
                if (s.Threads == budget.IntraOpThreads && s.AtOnce == 1 && s.Arena && s.Pattern == memoryPattern) sessionBytes = added;
                Console.WriteLine($"| {s.Name} | {ms:0.0} ms | {fps:0.0} frames/s | {added / 1e6:0} MB |");
            }

            long pooled = PooledBytesPerFrame(folder, frames[0], memoryPattern);
            return Service(models, frames, runs, best, bestName, framesAtOnce, memoryPattern, networkRuns, intraOp, sessionBytes, pooled);
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
        // Throughput over at least 20 frames: the best of several settings is taken, and a short count flatters a lucky one.
        int total = Math.Max(Math.Max(2 * runs, 20), 2 * atOnce);
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

    /// <summary>
    /// Managed bytes one frame path keeps between frames (pooled maps, the preprocessor's tensor, the scoring core's
    /// buffers): the managed heap after a full GC, with the model open and two frames scored, less before opening it.
    /// The session's own native memory is not on the managed heap.
    /// </summary>
    private static long PooledBytesPerFrame(string folder, byte[] png, bool memoryPattern)
    {
        long before = GC.GetTotalMemory(forceFullCollection: true);
        using var local = Strayspot.Service.Inference.LocalModel.Open(folder,
            Strayspot.Service.Inference.ParallelSettings.FromThreads(CpuBudget.Current.IntraOpThreads) with { MemoryPattern = memoryPattern });
        var decoder = new FrameDecoder();
        for (int i = 0; i < 2; i++)
        {
            using var f = decoder.Decode(png);
            local.Runner.Score(local.Lease, f, null, (s, _) => s.FrameScore);
        }
        long after = GC.GetTotalMemory(forceFullCollection: true);
        GC.KeepAlive(local);
        return after - before;
    }

    private static Result Service(string models, byte[][] frames, int runs, double networkFps, string networkSetting, int? framesAtOnce,
        bool memoryPattern, int? networkRuns, int? intraOp, long sessionBytes, long pooledBytes)
    {
        int threads = intraOp ?? CpuBudget.Current.IntraOpThreads;
        int runsAtOnce = networkRuns ?? new ServiceOptions().NetworkRunsAtOnce;
        int slots = framesAtOnce ?? new ServiceOptions().MaxConcurrentFrames;
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
                ["Service:MaxConcurrentFrames"] = slots.ToString(),
                ["Service:OnnxMemoryPattern"] = memoryPattern ? "true" : "false",
                ["Service:NetworkRunsAtOnce"] = runsAtOnce.ToString(),
                ["Service:IntraOpThreads"] = threads.ToString(),
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
            Console.WriteLine($"Service: Service:MaxConcurrentFrames = {slots}{(framesAtOnce is null ? " (the default: the CPU budget's frames in flight)" : "")}, intra-op threads {threads}{(intraOp is null ? " (the CPU budget's)" : "")}, ONNX Runtime memory pattern {(memoryPattern ? "on" : "off")}, network runs at once {(runsAtOnce == 0 ? "not limited" : runsAtOnce)}.");
            Console.WriteLine();
            Console.WriteLine("| HTTP service, 1024×512 PNG, no artifacts | p50 | p99 | p99 / p50 | throughput | service / network alone |");
            Console.WriteLine("|---|---|---|---|---|---|");
            long peak = idle;
            long peakManaged = 0;
            var rows = new List<(int, double, double, double)>();
            // The service's own stage times (its metrics instrument), recorded during the 1-client run only.
            var stages = new Dictionary<string, List<double>>();
            bool recording = false;
            using var listener = new MeterListener();
            listener.InstrumentPublished = (instrument, l) =>
            {
                if (instrument.Meter.Name == ServiceMetrics.MeterName && instrument.Name == "strayspot.stage.duration") l.EnableMeasurementEvents(instrument);
            };
            listener.SetMeasurementEventCallback<double>((_, seconds, tags, _) =>
            {
                if (!Volatile.Read(ref recording)) return;
                foreach (var tag in tags)
                    if (tag.Key == "stage" && tag.Value is string name)
                        lock (stages)
                        {
                            if (!stages.TryGetValue(name, out var list)) stages[name] = list = [];
                            list.Add(seconds * 1000);
                        }
            });
            listener.Start();
            foreach (int clients in new[] { 1, 2, 4, 16 })
            {
                using var sampler = new Timer(_ =>
                {
                    long r = Resident();
                    if (r > Interlocked.Read(ref peak)) { Interlocked.Exchange(ref peak, r); Interlocked.Exchange(ref peakManaged, GC.GetTotalMemory(false)); }
                }, null, 0, 50);
                int perClient = clients == 16 ? Math.Max(3, runs / 3) : Math.Max(4, runs * 2 / clients);
                Volatile.Write(ref recording, clients == 1);
                var (p50, p99, fps, refused) = ServiceBench.Clients(http, frames, clients, perClient);
                Volatile.Write(ref recording, false);
                rows.Add((clients, p50, p99, fps));
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

            Console.WriteLine();
            Console.WriteLine("| memory above idle at the 16-client peak, split | MB | how it was measured |");
            Console.WriteLine("|---|---|---|");
            Console.WriteLine($"| resident, all of it | {(peak - idle) / 1e6:0} | working set sampled every 50 ms, less the idle one |");
            Console.WriteLine($"| managed heap | {(peakManaged - idleManaged) / 1e6:0} | `GC.GetTotalMemory` at the peak sample, less idle |");
            Console.WriteLine($"| native: ONNX Runtime's arena and the runtimes' own | {(peak - idle - (peakManaged - idleManaged)) / 1e6:0} | the rest |");
            Console.WriteLine($"| for scale: one session's arena after its first 1024×512 run | {sessionBytes / 1e6:0} | network alone, the service's thread and memory-pattern setting, working set added |");
            Console.WriteLine($"| for scale: pooled maps and buffers per frame in flight | {pooledBytes / 1e6:0} | managed heap after a full GC with a frame path open and two frames scored, less before; already in idle |");
            long upload = (long)frames.Average(f => f.Length);
            Console.WriteLine($"| for scale: uploads in flight, 16 clients | {16 * 2 * upload / 1e6:0} | computed: 16 × 2 copies (form buffer, frame bytes) × {upload / 1e3:0} KB per PNG; in the managed heap row |");

            Console.WriteLine();
            Console.WriteLine("| where one frame's time goes (service, 1 client) | median ms | share of the 1-client p50 |");
            Console.WriteLine("|---|---|---|");
            double p50One = rows[0].Item2;
            double sum = 0;
            foreach (string name in new[] { "decode", "preprocess", "inference", "scoring", "encode" })
            {
                if (!stages.TryGetValue(name, out var list) || list.Count == 0) continue;
                double m = Measure.Median(list);
                sum += m;
                Console.WriteLine($"| {name} | {m:0.0} | {m / p50One:0%} |");
            }
            Console.WriteLine($"| HTTP, form reading, queueing, JSON (the rest) | {Math.Max(0, p50One - sum):0.0} | {Math.Max(0, p50One - sum) / p50One:0%} |");
            return new Result(networkFps, networkSetting, rows, idle, peak);
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
