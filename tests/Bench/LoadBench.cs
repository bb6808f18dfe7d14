using System.Diagnostics;
using System.Diagnostics.Metrics;
using Microsoft.AspNetCore.Builder;
using SessionOptions = Microsoft.ML.OnnxRuntime.SessionOptions;
using Microsoft.AspNetCore.Http;
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
        long IdleBytes, long PeakBytes)
    {
        /// <summary>Per client count: throughput of every round, CPU per frame and the sink's share.</summary>
        public List<ClientRow> Rows { get; init; } = [];
        public double Cpus { get; init; }
        /// <summary>Per client count: median frames/s of the service as set and of the same with a lone-run session, alternating.</summary>
        public List<(int Clients, double Default, double Lone, double Spread)> LoneRun { get; init; } = [];
    }

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
            // The two splits of the cores that win on the network alone, kept open and warm (their arenas are in the
            // idle figure): each interleaved round measures both beside the service, and the better median is the reference.
            using var referenceValue = OrtValue.CreateTensorValueFromMemory(tensor, shape);
            var references = new List<(string Name, InferenceSession Session, int AtOnce)>();
            try
            {
                foreach (var (t, atOnce) in new[] { (cores, 1), (1, cores) }.Distinct())
                {
                    var session = NetworkSession(onnx, t, arena: true, pattern: memoryPattern);
                    references.Add(($"{t} intra-op thread(s), {atOnce} frame(s) at once", session, atOnce));
                    RoundOfNetwork(session, referenceValue, atOnce, 2 * atOnce);
                }
                var rounds = references.Select(r => (r.Name, (Func<(double, double)>)(() => RoundOfNetwork(r.Session, referenceValue, r.AtOnce, 20)))).ToList();
                return Service(models, frames, runs, best, bestName, framesAtOnce, memoryPattern, networkRuns, intraOp, sessionBytes, pooled, rounds);
            }
            finally
            {
                foreach (var r in references) r.Session.Dispose();
            }
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }

    private static InferenceSession NetworkSession(string onnx, int threads, bool arena, bool pattern)
    {
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
        return new InferenceSession(onnx, so);
    }

    /// <summary>Throughput and process CPU ms per frame of <paramref name="total"/> runs, <paramref name="atOnce"/> at a time.</summary>
    private static (double Fps, double CpuMs) RoundOfNetwork(InferenceSession session, OrtValue value, int atOnce, int total)
    {
        var inputs = new Dictionary<string, OrtValue> { [session.InputMetadata.Keys.First()] = value };
        using var runOptions = new RunOptions();
        int next = 0;
        var cpu0 = ProcessCpu();
        var clock = Stopwatch.StartNew();
        Parallel.For(0, atOnce, new ParallelOptions { MaxDegreeOfParallelism = atOnce }, _ =>
        {
            while (Interlocked.Increment(ref next) <= total) { using var o = session.Run(runOptions, inputs, session.OutputNames); }
        });
        double seconds = clock.Elapsed.TotalSeconds;
        return (total / seconds, (ProcessCpu() - cpu0).TotalMilliseconds / total);
    }

    private static (double Ms, double Fps, long Added) NetworkAlone(string onnx, float[] tensor, long[] shape, int threads, int atOnce,
        bool arena, bool pattern, int runs)
    {
        GC.Collect();
        GC.WaitForPendingFinalizers();
        long before = Resident();
        using var session = NetworkSession(onnx, threads, arena, pattern);
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

    /// <summary>One client count's rounds: the service, the sink (load clients and loopback transport alone) and the network alone.</summary>
    public sealed record ClientRow(int Clients, int PerClient, double P50, double P99, List<double> Fps, List<double> NetworkFps,
        double CpuMsPerFrame, double SinkCpuMsPerFrame, double CoresBusy, int Refused)
    {
        public double MedianFps => Measure.Median(Fps);
        public double MedianNetworkFps => Measure.Median(NetworkFps);
        /// <summary>Half the range of the rounds' throughput: the run-to-run spread a fall is judged against.</summary>
        public double HalfRange => (Fps.Max() - Fps.Min()) / 2;
    }

    private static Result Service(string models, byte[][] frames, int runs, double networkFps, string networkSetting, int? framesAtOnce,
        bool memoryPattern, int? networkRuns, int? intraOp, long sessionBytes, long pooledBytes, List<(string Name, Func<(double Fps, double CpuMs)> Round)> networkRounds)
    {
        int threads = intraOp ?? CpuBudget.Current.IntraOpThreads;
        int runsAtOnce = networkRuns ?? new ServiceOptions().NetworkRunsAtOnce;
        int slots = framesAtOnce ?? new ServiceOptions().MaxConcurrentFrames;
        var (app, port) = BuildService(models, "data", slots, threads, memoryPattern, runsAtOnce, loneThreads: 0);
        // The load clients' own cost: the same multipart bodies to an endpoint that only drains them and answers
        // with as many JSON bytes as the frames endpoint does (both ends of loopback HTTP included).
        byte[] sinkAnswer = [];
        app.MapPost("/bench/sink", async (HttpRequest request) =>
        {
            await request.Body.CopyToAsync(Stream.Null);
            return Results.Bytes(Volatile.Read(ref sinkAnswer), "application/json");
        });
        app.StartAsync().GetAwaiter().GetResult();
        try
        {
            using var http = new HttpClient { BaseAddress = new Uri($"http://127.0.0.1:{port}"), Timeout = TimeSpan.FromMinutes(5) };
            for (int i = 0; i < 300 && !http.GetAsync("/readyz").Result.IsSuccessStatusCode; i++) Thread.Sleep(100);
            ServiceBench.Post(http, frames[0]);
            ServiceBench.Post(http, frames[1]);
            string answerJson = AnswerJson(http, frames[0]);
            Volatile.Write(ref sinkAnswer, System.Text.Encoding.UTF8.GetBytes(answerJson));
            ServiceBench.Post(http, frames[0], "/bench/sink");
            GC.Collect();
            GC.WaitForPendingFinalizers();
            long idle = Resident();
            long idleManaged = GC.GetTotalMemory(false);
            double cpus = CpuBudget.Current.Cpus;

            int rounds = Math.Max(3, runs / 3);
            int[] counts = [1, 2, 4, 16];
            Console.WriteLine();
            Console.WriteLine($"Service: Service:MaxConcurrentFrames = {slots}{(framesAtOnce is null ? " (the default: the CPU budget's frames in flight)" : "")}, intra-op threads {threads}{(intraOp is null ? " (the CPU budget's)" : "")}, ONNX Runtime memory pattern {(memoryPattern ? "on" : "off")}, network runs at once {(runsAtOnce == 0 ? "not limited" : runsAtOnce)}. " +
                $"{rounds} interleaved rounds; each round runs the network alone ({string.Join("; ", networkRounds.Select(n => n.Name))}: 20 frames each), then the service and the sink at 1, 2, 4 and 16 clients.");
            long peak = idle;
            long peakManaged = 0;
            // The service's own stage times (its metrics instrument), recorded during the 1-client rounds only.
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
            var latencies = counts.ToDictionary(c => c, _ => new List<double>());
            var fps = counts.ToDictionary(c => c, _ => new List<double>());
            var oneLatenciesInOrder = new List<double>();
            var alone = networkRounds.ToDictionary(n => n.Name, _ => (Fps: new List<double>(), Cpu: new List<double>()));
            var cpu = counts.ToDictionary(c => c, _ => (Ms: 0.0, Wall: 0.0, Frames: 0));
            var sink = counts.ToDictionary(c => c, _ => (Ms: 0.0, Frames: 0));
            var refusedBy = counts.ToDictionary(c => c, _ => 0);
            int PerClient(int clients) => clients == 16 ? 3 : Math.Max(4, 24 / clients);
            using (new Timer(_ =>
            {
                long r = Resident();
                if (r > Interlocked.Read(ref peak)) { Interlocked.Exchange(ref peak, r); Interlocked.Exchange(ref peakManaged, GC.GetTotalMemory(false)); }
            }, null, 0, 50))
                for (int round = 0; round < rounds; round++)
                {
                    foreach (var (name, networkRound) in networkRounds)
                    {
                        var (aloneFps, aloneCpu) = networkRound();
                        alone[name].Fps.Add(aloneFps);
                        alone[name].Cpu.Add(aloneCpu);
                    }
                    foreach (int clients in counts)
                    {
                        int perClient = PerClient(clients);
                        Volatile.Write(ref recording, clients == 1);
                        var cpu0 = ProcessCpu();
                        var (lat, refused, seconds) = ServiceBench.ClientLatencies(http, frames, clients, perClient);
                        var spent = ProcessCpu() - cpu0;
                        Volatile.Write(ref recording, false);
                        latencies[clients].AddRange(lat);
                        if (clients == 1) oneLatenciesInOrder.AddRange(lat);
                        fps[clients].Add(lat.Count / seconds);
                        refusedBy[clients] += refused;
                        var c = cpu[clients];
                        cpu[clients] = (c.Ms + spent.TotalMilliseconds, c.Wall + seconds * 1000, c.Frames + lat.Count + refused);

                        cpu0 = ProcessCpu();
                        var (sinkLat, sinkRefused, _) = ServiceBench.ClientLatencies(http, frames, clients, perClient, "/bench/sink");
                        spent = ProcessCpu() - cpu0;
                        var s = sink[clients];
                        sink[clients] = (s.Ms + spent.TotalMilliseconds, s.Frames + sinkLat.Count + sinkRefused);
                    }
                }
            string reference = alone.MaxBy(a => Measure.Median(a.Value.Fps)).Key;
            var rows = new List<ClientRow>();
            foreach (int clients in counts)
            {
                var lat = latencies[clients];
                lat.Sort();
                var c = cpu[clients];
                rows.Add(new ClientRow(clients, PerClient(clients), Measure.Median(lat), ServiceBench.Percentile99(lat), fps[clients], alone[reference].Fps,
                    c.Ms / c.Frames, sink[clients].Ms / sink[clients].Frames, c.Ms / c.Wall, refusedBy[clients]));
            }
            double netFps = Measure.Median(alone[reference].Fps);

            Console.WriteLine();
            Console.WriteLine("| HTTP service, 1024×512 PNG, no artifacts | p50 | p99 | p99 / p50 | throughput | service / network alone |" +
                " throughput over the rounds, min–max | CPU ms per frame (process) | of it: load clients + loopback HTTP (sink) | cores busy | ceiling: service / network alone at this CPU per frame | ceiling without the clients' share |");
            Console.WriteLine("|---|---|---|---|---|---|---|---|---|---|---|---|");
            foreach (var r in rows)
            {
                double ceiling = cpus * 1000 / r.CpuMsPerFrame / r.MedianNetworkFps;
                double ceilingOwn = cpus * 1000 / Math.Max(1e-3, r.CpuMsPerFrame - r.SinkCpuMsPerFrame) / r.MedianNetworkFps;
                Console.WriteLine($"| {r.Clients} client(s) × {r.PerClient} frames × {rounds} rounds | {r.P50:0} ms | {r.P99:0} ms | {r.P99 / r.P50:0.0} | " +
                    $"{r.MedianFps:0.0} frames/s{(r.Refused > 0 ? $", {r.Refused} refused" : "")} | {r.MedianFps / r.MedianNetworkFps:0.00} | " +
                    $"{r.Fps.Min():0.0}–{r.Fps.Max():0.0} | {r.CpuMsPerFrame:0.0} | {r.SinkCpuMsPerFrame:0.0} | {r.CoresBusy:0.00} of {cpus:0.##} | {ceiling:0.00} | {ceilingOwn:0.00} |");
            }
            foreach (var (name, (aloneFps, aloneCpu)) in alone)
            {
                double f = Measure.Median(aloneFps), c = Measure.Median(aloneCpu);
                Console.WriteLine($"| network alone, {name}, 20 frames per round{(name == reference ? " (the reference)" : "")} | | | | {f:0.0} frames/s | {f / netFps:0.00} | " +
                    $"{aloneFps.Min():0.0}–{aloneFps.Max():0.0} | {c:0.0} | | {f * c / 1000:0.00} of {cpus:0.##} | {cpus * 1000 / c / netFps:0.00} | |");
            }
            Console.WriteLine();
            Console.WriteLine($"CPU ms per frame: process CPU time (user + system, `Process.TotalProcessorTime`) over the rounds at that client count, " +
                $"divided by the frames answered; the service and its load clients share this process. The sink column is the same bodies " +
                $"posted by the same clients to an endpoint that only drains them and answers {sinkAnswer.Length} bytes of JSON (the frames endpoint's answer size). " +
                $"Ceiling = {cpus:0.##} CPUs × 1000 / CPU ms per frame, as a ratio to the network alone's median of the same rounds ({netFps:0.0} frames/s); " +
                "a ratio below its ceiling means cores stood idle (cores busy below the budget).");

            Console.WriteLine();
            Console.WriteLine($"Network alone, best setting of the table above: {networkFps:0.0} frames/s ({networkSetting}); the ratios use the better median of the interleaved rounds ({reference}, {netFps:0.0} frames/s).");
            GC.Collect();
            GC.WaitForPendingFinalizers();
            long after = Resident();
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
            double p50One = rows[0].P50;
            string[] stageNames = ["upload", "wait", "decode", "preprocess", "inference", "scoring", "encode"];
            foreach (string name in stageNames)
            {
                if (!stages.TryGetValue(name, out var list) || list.Count == 0) continue;
                double m = Measure.Median(list);
                Console.WriteLine($"| {name} | {m:0.0} | {m / p50One:0%} |");
            }
            // One client sends one frame at a time, so the n-th time of each stage belongs to the n-th answer: the rest is
            // taken frame by frame (a difference of medians would mix different frames).
            var ordered = oneLatenciesInOrder;
            if (stageNames.All(n => stages.TryGetValue(n, out var l) && l.Count == ordered.Count))
            {
                var rest = ordered.Select((lat, i) => lat - stageNames.Sum(n => stages[n][i])).ToList();
                double m = Measure.Median(rest);
                Console.WriteLine($"| HTTP, routing, drift watch, JSON (the rest, frame by frame) | {m:0.0} | {m / p50One:0%} |");
            }
            else
            {
                double sum = stageNames.Where(stages.ContainsKey).Sum(n => Measure.Median(stages[n]));
                Console.WriteLine($"| HTTP, routing, drift watch, JSON (the rest: p50 less the stages' medians) | {Math.Max(0, p50One - sum):0.0} | {Math.Max(0, p50One - sum) / p50One:0%} |");
            }
            Console.WriteLine($"| of the rest: the sink's p50 at 1 client (clients and loopback HTTP, same bodies, {sinkAnswer.Length}-byte answer) | {SinkP50(http, frames):0.0} | |");
            Console.WriteLine($"| of the rest: the drift watch on one 1024×512 frame's maps (measured apart) | {DriftMs(models, runs):0.0} | |");
            var lone = LoneRunComparison(models, frames, http, runs, slots, threads, memoryPattern, runsAtOnce);
            return new Result(netFps, reference, rows.Select(r => (r.Clients, r.P50, r.P99, r.MedianFps)).ToList(), idle, peak) { Rows = rows, Cpus = cpus, LoneRun = lone };
        }
        finally
        {
            app.StopAsync().GetAwaiter().GetResult();
            ((IDisposable)app).Dispose();
        }
    }

    /// <summary>Median ms of one drift-watch update (the service's observer) on a 1024×512 frame's max-logit and class maps.</summary>
    private static double DriftMs(string models, int runs)
    {
        var version = Strayspot.Service.Inference.ModelVersion.Read(Path.Combine(models, "demo"));
        if (version.Statistics is null) return double.NaN;
        var drift = new Strayspot.Scoring.Drift.MaxLogitDrift(version.Statistics);
        var rng = new Random(5);
        int n = 1024 * 512, classes = version.Statistics.Count;
        var maxLogit = new float[n];
        var classIndex = new ushort[n];
        for (int i = 0; i < n; i++) { maxLogit[i] = (float)rng.NextDouble() * 10; classIndex[i] = (ushort)(i / 4096 % classes); }
        return Measure.MedianMs(runs, () => drift.Observe(maxLogit, classIndex));
    }

    /// <summary>
    /// A lone frame on every thread: a second service in this process, the same settings plus Service:LoneRunThreads
    /// = the budget's threads, measured in rounds alternating with the service above at 1, 2, 4 and 16 clients
    /// (after the memory figures, which it would otherwise disturb).
    /// </summary>
    private static List<(int Clients, double Default, double Lone, double Spread)> LoneRunComparison(string models, byte[][] frames, HttpClient main,
        int runs, int slots, int threads, bool memoryPattern, int runsAtOnce)
    {
        int wide = CpuBudget.Current.Threads;
        var result = new List<(int, double, double, double)>();
        if (wide <= threads) return result;
        long before = Resident();
        var (app, port) = BuildService(models, "data-lone", slots, threads, memoryPattern, runsAtOnce, wide);
        app.StartAsync().GetAwaiter().GetResult();
        try
        {
            using var http = new HttpClient { BaseAddress = new Uri($"http://127.0.0.1:{port}"), Timeout = TimeSpan.FromMinutes(5) };
            for (int i = 0; i < 300 && !http.GetAsync("/readyz").Result.IsSuccessStatusCode; i++) Thread.Sleep(100);
            for (int i = 0; i < 4; i++) ServiceBench.Post(http, frames[i % frames.Length]);
            int rounds = Math.Max(3, runs / 5);
            int[] counts = [1, 2, 4, 16];
            var fps = new Dictionary<(int, bool), List<double>>();
            var p50 = new Dictionary<(int, bool), List<double>>();
            for (int r = 0; r < rounds; r++)
                foreach (int clients in counts)
                    foreach (bool lone in r % 2 == 0 ? new[] { false, true } : [true, false])
                    {
                        int perClient = clients == 16 ? 2 : Math.Max(3, 16 / clients);
                        var (lat, _, seconds) = ServiceBench.ClientLatencies(lone ? http : main, frames, clients, perClient);
                        if (!fps.TryGetValue((clients, lone), out var list)) { fps[(clients, lone)] = list = []; p50[(clients, lone)] = []; }
                        list.Add(lat.Count / seconds);
                        p50[(clients, lone)].Add(Measure.Median(lat));
                    }
            long added = Resident() - before;
            Console.WriteLine();
            Console.WriteLine($"A lone frame's network on {wide} threads (Service:LoneRunThreads {wide}: a second ONNX Runtime session of the model, taken by a run that starts while no other is in flight) " +
                $"against the service as set above, {rounds} alternating rounds, median frames/s (min–max) and median p50:");
            Console.WriteLine();
            Console.WriteLine("| clients | as set above | with the lone-run session | lone / as set |");
            Console.WriteLine("|---|---|---|---|");
            foreach (int c in counts)
            {
                var d = fps[(c, false)];
                var l = fps[(c, true)];
                double md = Measure.Median(d), ml = Measure.Median(l);
                double spread = Math.Max(d.Max() - d.Min(), l.Max() - l.Min()) / 2;
                result.Add((c, md, ml, spread));
                Console.WriteLine($"| {c} | {md:0.0} ({d.Min():0.0}–{d.Max():0.0}), p50 {Measure.Median(p50[(c, false)]):0} ms | {ml:0.0} ({l.Min():0.0}–{l.Max():0.0}), p50 {Measure.Median(p50[(c, true)]):0} ms | {ml / md:0.00} |");
            }
            Console.WriteLine();
            Console.WriteLine($"Resident memory added by the second service (its two sessions, their arenas, its pools) and its rounds: {added / 1e6:0} MB.");
        }
        finally
        {
            app.StopAsync().GetAwaiter().GetResult();
            ((IDisposable)app).Dispose();
        }
        return result;
    }

    /// <summary>A service on a free loopback port with the load suite's settings (not started).</summary>
    private static (Microsoft.AspNetCore.Builder.WebApplication App, int Port) BuildService(string models, string data, int slots, int threads,
        bool memoryPattern, int runsAtOnce, int loneThreads)
    {
        int port = ServiceBench.FreePort();
        var app = ServiceHost.Build(new ServiceHostSettings
        {
            ModelsRoot = models,
            DataRoot = Path.Combine(Path.GetDirectoryName(models)!, data),
            Urls = [$"http://127.0.0.1:{port}"],
            ConsoleLog = false,
            Configuration = new Dictionary<string, string?>
            {
                ["Service:MaxQueuedFrames"] = "64",
                ["Service:MaxConcurrentFrames"] = slots.ToString(),
                ["Service:OnnxMemoryPattern"] = memoryPattern ? "true" : "false",
                ["Service:NetworkRunsAtOnce"] = runsAtOnce.ToString(),
                ["Service:IntraOpThreads"] = threads.ToString(),
                ["Service:LoneRunThreads"] = loneThreads.ToString(),
            },
        });
        return (app, port);
    }

    private static double SinkP50(HttpClient http, byte[][] frames)
    {
        var (lat, _, _) = ServiceBench.ClientLatencies(http, frames, 1, 24, "/bench/sink");
        return lat.Count == 0 ? double.NaN : Measure.Median(lat);
    }

    /// <summary>The frames endpoint's JSON answer for one frame, for the sink to answer as many bytes.</summary>
    private static string AnswerJson(HttpClient http, byte[] png)
    {
        using var response = ServiceBench.PostForAnswer(http, png);
        return response.Content.ReadAsStringAsync().GetAwaiter().GetResult();
    }

    private static TimeSpan ProcessCpu()
    {
        using var p = Process.GetCurrentProcess();
        return p.TotalProcessorTime;
    }

    private static long Resident()
    {
        using var p = Process.GetCurrentProcess();
        return p.WorkingSet64;
    }
}
