using System.Diagnostics;
using Strayspot.Service.Demo;
using Strayspot.Service.Frames;
using Strayspot.Service.Hosting;
using Strayspot.Service.Inference;

namespace Strayspot.Bench;

/// <summary>
/// <c>cadence</c>: why one inference costs more inside the service than alone. The demo model at 1024×512 through
/// the service's own session settings, timed back to back (as the network-alone table does), after a pause the
/// length of the rest of a frame (threads asleep, caches kept), and after decoding, preprocessing and scoring a
/// frame in between (what the service does); the three alternate so they see the same machine load.
/// </summary>
public static class CadenceBench
{
    public static void Run(int runs)
    {
        string root = Directory.CreateTempSubdirectory("strayspot-bench-cadence-").FullName;
        try
        {
            var (folder, _) = BundledDemo.Extract(Path.Combine(root, "models", "demo"), Path.Combine(root, "frames"));
            byte[] png = DemoPng.Encode(new ApronSceneGenerator(1024, 512).Render(70));
            using var local = LocalModel.Open(folder, ParallelSettings.FromThreads(Environment.ProcessorCount));
            var decoder = new FrameDecoder();
            using var frame = decoder.Decode(png);
            var worker = new FramePreprocessor(local.Version.Descriptor.Input);
            var input = worker.Prepare(frame);
            var session = local.Lease.Session;
            double Timed() { long t = Stopwatch.GetTimestamp(); using (session.Run(input)) { } return Stopwatch.GetElapsedTime(t).TotalMilliseconds; }
            for (int i = 0; i < 3; i++) Timed();
            var backToBack = new List<double>();
            var afterPause = new List<double>();
            var afterFrameWork = new List<double>();
            for (int i = 0; i < Math.Max(runs, 15); i++)
            {
                Timed();
                backToBack.Add(Timed());
                Thread.Sleep(15);
                afterPause.Add(Timed());
                // The rest of a frame: decode, preprocess, the post-hoc chain (its own network run is not timed).
                using (var f = decoder.Decode(png)) local.Runner.Score(local.Lease, f, null, (s, _) => s.FrameScore);
                input = worker.Prepare(frame);
                afterFrameWork.Add(Timed());
            }
            Console.WriteLine();
            Console.WriteLine($"| one inference, demo model 1024×512, the service's session settings ({Environment.ProcessorCount} intra-op threads, no spinning, memory pattern off) | median ms |");
            Console.WriteLine("|---|---|");
            Console.WriteLine($"| back to back (the network-alone table's way) | {Measure.Median(backToBack):0.0} |");
            Console.WriteLine($"| after a 15 ms pause (threads asleep) | {Measure.Median(afterPause):0.0} |");
            Console.WriteLine($"| after decoding, preprocessing and scoring a frame (the service's way) | {Measure.Median(afterFrameWork):0.0} |");
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }
}
