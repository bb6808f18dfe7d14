using System.Diagnostics;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Formats.Jpeg;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Calibration;
using Strayspot.Service.Demo;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;

namespace Strayspot.Bench;

/// <summary>
/// The model runtime's cases on the bundled demo: frame decoding and preprocessing, inference, the whole frame path,
/// calibration throughput and session load time.
/// </summary>
public static class RuntimeBench
{
    public static void Run(int runs)
    {
        string root = Directory.CreateTempSubdirectory("strayspot-bench-").FullName;
        try
        {
            var (modelFolder, _) = BundledDemo.Extract(Path.Combine(root, "model"), Path.Combine(root, "frames"));
            Console.WriteLine();
            Console.WriteLine("| case | median | note |");
            Console.WriteLine("|---|---|---|");

            byte[] jpeg = Encode(Scene(1920, 1080, 11), new JpegEncoder { Quality = 90 });
            var decoder = new FrameDecoder();
            var resizeTo1024 = new InputDescriptor { Size = new SizePolicy { Mode = "fixed", Height = 512, Width = 1024 } };
            var preprocessor = new FramePreprocessor(resizeTo1024);
            double decode = Measure.MedianMs(runs, () => { using var f = decoder.Decode(jpeg); });
            double prepare = Measure.MedianMs(runs, () => { using var f = decoder.Decode(jpeg); preprocessor.Prepare(f); });
            Row("decode 1920×1080 JPEG", decode, $"{jpeg.Length / 1024} KiB, quality 90");
            Row("decode + resize to 1024×512 + normalize, 1920×1080 JPEG", prepare, "target ≤ 30 ms");

            var options = new ModelRuntimeOptions { IntraOpThreads = Environment.ProcessorCount };
            double loadCold = Measure.MedianMs(Math.Max(3, runs / 3), () => SegmentationModel.LoadFolder(modelFolder, options with { WarmUp = false }).Dispose());
            double loadWarm = Measure.MedianMs(3, () => SegmentationModel.LoadFolder(modelFolder, options).Dispose());
            Row("demo session load", loadCold, "without the warm-up run");
            Row("demo session load + warm-up run", loadWarm, "what the service does at start");

            using var bundle = LocalModel.Open(modelFolder, new ParallelSettings { IntraOpThreads = options.IntraOpThreads });
            using var frame = decoder.Decode(Encode(Scene(1024, 512, 12), new PngEncoder()));
            var demoPreprocessor = new FramePreprocessor(bundle.Version.Descriptor.Input);
            var input = demoPreprocessor.Prepare(frame);
            double inference = Measure.MedianMs(runs, () => { using var lease = bundle.Lease.Session.Run(input); });
            Row("demo model inference, 1024×512", inference, "target ≤ 50 ms");
            var stages = new List<FrameTimings>();
            double whole = Measure.MedianMs(runs, () => stages.Add(bundle.Runner.Score(bundle.Lease, frame, null, (_, t) => t)));
            double scoring = Measure.Median(stages.Select(t => t.Scoring.TotalMilliseconds).ToList());
            double network = Measure.Median(stages.Select(t => t.Inference.TotalMilliseconds).ToList());
            Row("whole frame path, 1024×512 (preprocess + inference + full method + regions)", whole,
                $"post-hoc stages {scoring:0.0} ms = {scoring / network:0.00}× the network's {network:0.0} ms");

            // The descriptor's surface classes mark each region on or off a surface: its cost, alternating with and
            // without so both see the same machine.
            // Each option set has its own pooled pipeline, reused as the service does.
            var unmarked = bundle.Version.Defaults with { MarkedSurfaceClasses = null };
            var withMarks = new List<double>();
            var withoutMarks = new List<double>();
            for (int i = 0; i < runs + 2; i++)
            {
                var a = bundle.Runner.Score(bundle.Lease, frame, null, (_, t) => t).Scoring.TotalMilliseconds;
                var b = bundle.Runner.Score(bundle.Lease, frame, unmarked, (_, t) => t).Scoring.TotalMilliseconds;
                if (i < 2) continue;
                withMarks.Add(a);
                withoutMarks.Add(b);
            }
            double markedMs = Measure.Median(withMarks), unmarkedMs = Measure.Median(withoutMarks);
            Row("post-hoc stages, regions marked on or off the descriptor's surface classes", markedMs,
                $"{unmarkedMs:0.0} ms without marking: {markedMs / unmarkedMs:0.00}×");

            string calibFrames = Path.Combine(root, "calibration-frames");
            Directory.CreateDirectory(calibFrames);
            const int calibCount = 8;
            for (int i = 0; i < calibCount; i++)
                File.WriteAllBytes(Path.Combine(calibFrames, $"f{i:00}.png"), Encode(Scene(1024, 512, 100 + i), new PngEncoder()));
            var files = Calibrator.ListFrames(calibFrames);
            var calibrator = new Calibrator(bundle.Runner, bundle.Lease, decoder, () => new PixelReductionMaxLogitReducer(), new CalibrationOptions { CheckpointEvery = 0 });
            var clock = Stopwatch.StartNew();
            calibrator.Run(files, Path.Combine(root, "calibration.json"));
            Row("calibration throughput, 1024×512 PNG frames", clock.Elapsed.TotalMilliseconds / calibCount,
                $"{calibCount / clock.Elapsed.TotalSeconds:0.0} frames/s (one run of {calibCount} frames)");
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
        Console.WriteLine();
        Console.WriteLine("Times are medians in ms per frame (per load for session load).");
    }

    private static void Row(string name, double ms, string note) => Console.WriteLine($"| {name} | {ms:0.0} ms | {note} |");

    private static Image<Rgb24> Scene(int width, int height, int seed)
    {
        var f = new ApronSceneGenerator(width, height).Render(seed);
        return Image.LoadPixelData<Rgb24>(f.Rgb, width, height);
    }

    private static byte[] Encode(Image<Rgb24> image, SixLabors.ImageSharp.Formats.IImageEncoder encoder)
    {
        using (image)
        {
            var stream = new MemoryStream();
            image.Save(stream, encoder);
            return stream.ToArray();
        }
    }
}
