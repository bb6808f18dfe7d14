using System.Diagnostics;
using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Demo;
using Strayspot.Service.Evaluation;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;

namespace Strayspot.Bench;

/// <summary>
/// The evaluation's cost: all seven methods over N demo frames at 1024×512 against scoring the same frames once
/// with one method (the frame runner), and the streaming mode's memory as the frame count grows.
/// </summary>
public static class EvaluationBench
{
    // As many frames as the target names: the fixed costs (plots, tables) are then spread as they are in practice.
    private const int Frames = 200;

    public static void Run(int runs)
    {
        string root = RepositoryRoot();
        string model = Path.Combine(root, "models", "demo");
        string work = Directory.CreateTempSubdirectory("strayspot-evalbench-").FullName;
        try
        {
            string data = Path.Combine(work, "data");
            Directory.CreateDirectory(data);
            var set = DemoAssets.HeldOut(Frames);
            for (int i = 0; i < set.Count; i++)
            {
                var f = set[i];
                DemoPng.SaveRgb(Path.Combine(data, $"frame_{i:D3}.png"), f.Frame.Rgb, f.Frame.Width, f.Frame.Height);
                DemoPng.SaveGray(Path.Combine(data, $"mask_{i:D3}.png"), f.AnomalyMask, f.Frame.Width, f.Frame.Height);
            }
            int reps = Math.Max(1, runs / 15);
            using var bundle = LocalModel.Open(model);
            var dataset = EvaluationDataset.Open(data, bundle.Version.ClassCount);
            var decoder = new FrameDecoder();

            double once = Measure.MedianMs(reps, () =>
            {
                foreach (var item in dataset.Items)
                {
                    using var frame = decoder.DecodeFile(item.FramePath);
                    bundle.Runner.Score(bundle.Lease, frame, null, (s, _) => s.FrameScore);
                }
            });
            var parts = new List<EvaluationTimings>();
            double evaluate = Measure.MedianMs(reps, () =>
                parts.Add(Evaluator.Run(bundle.Runner, bundle.Lease, dataset, Path.Combine(work, "out"), new EvaluationSettings()).Timings!));
            var last = parts[^1];

            Console.WriteLine();
            Console.WriteLine($"| case ({Frames} demo frames, 1024×512, {reps} runs) | ms per frame | ratio |");
            Console.WriteLine("|---|---|---|");
            Console.WriteLine($"| score once, one method (frame runner: decode, network, SML + BS + DS, regions) | {once / Frames:0.0} | 1.00× |");
            Console.WriteLine($"| evaluate, seven methods (decode, mask, network once, seven maps, seven accumulators, spill, regions, outputs) | {evaluate / Frames:0.0} | **{evaluate / once:0.00}×** |");
            Console.WriteLine($"| evaluate, parts of the last run: model pass / threshold pass / files (fixed cost, plots) | " +
                $"{last.ModelPass.TotalMilliseconds / Frames:0.0} / {last.ThresholdPass.TotalMilliseconds / Frames:0.0} / {last.Outputs.TotalMilliseconds / Frames:0.0} | " +
                $"model pass alone {last.ModelPass.TotalMilliseconds / once:0.00}× |");
            Core(bundle, decoder, dataset, reps);
            Memory(bundle, decoder, dataset);
        }
        finally
        {
            try { Directory.Delete(work, recursive: true); } catch (IOException) { }
        }
    }

    /// <summary>The scoring core alone on the same logits: seven maps + accumulation against one pipeline pass.</summary>
    private static void Core(LocalModel bundle, FrameDecoder decoder, EvaluationDataset dataset, int reps)
    {
        using var frame = decoder.DecodeFile(dataset.Items[0].FramePath);
        var mask = EvaluationDataset.ReadChecked(dataset.Items[0].MaskPath);
        var input = new FramePreprocessor(bundle.Version.Descriptor.Input).Prepare(frame);
        using var lease = bundle.Lease.Session.Run(input);
        float[]? crop = null;
        var logits = input.Box.CropToContent(lease.View, ref crop);
        var pipeline = new FramePipeline(bundle.Version.Profile.Effective, bundle.Version.Statistics);
        var scorer = new MultiMethodScorer(bundle.Version.Statistics, new MultiMethodOptions { Base = bundle.Version.Profile.Effective });
        int runs = Math.Max(5, reps * 5);
        double one = Measure.MedianMs(runs, () => pipeline.Score(logits, frame.Height, frame.Width));
        double seven = Measure.MedianMs(runs, () => { scorer.Score(logits, frame.Height, frame.Width); scorer.Accumulate(mask); });
        Console.WriteLine($"| scoring core only: FramePipeline (full method) vs MultiMethodScorer.Score + Accumulate (seven) | {one:0.0} vs {seven:0.0} | {seven / one:0.00}× |");
    }

    /// <summary>Streaming accumulators hold fixed memory: the heap after N and after 4N accumulated frames.</summary>
    private static void Memory(LocalModel bundle, FrameDecoder decoder, EvaluationDataset dataset)
    {
        using var frame = decoder.DecodeFile(dataset.Items[0].FramePath);
        var mask = EvaluationDataset.ReadChecked(dataset.Items[0].MaskPath);
        var input = new FramePreprocessor(bundle.Version.Descriptor.Input).Prepare(frame);
        using var lease = bundle.Lease.Session.Run(input);
        float[]? crop = null;
        var logits = input.Box.CropToContent(lease.View, ref crop);
        foreach (bool exact in new[] { false, true })
        {
            var scorer = new MultiMethodScorer(bundle.Version.Statistics, new MultiMethodOptions { Base = bundle.Version.Profile.Effective, Exact = exact });
            var heap = new List<(int Frames, long Heap, long Accumulators)>();
            int done = 0;
            foreach (int target in new[] { 4, 16 })
            {
                for (; done < target; done++)
                {
                    scorer.Score(logits, frame.Height, frame.Width);
                    scorer.Accumulate(mask);
                }
                heap.Add((done, GC.GetTotalMemory(forceFullCollection: true), scorer.AccumulatorBytes));
            }
            GC.KeepAlive(scorer);
            Console.WriteLine($"| {(exact ? "exact" : "streaming")} mode memory: managed heap after {heap[0].Frames} / {heap[1].Frames} frames | " +
                $"{heap[0].Heap / 1e6:0.0} MB / {heap[1].Heap / 1e6:0.0} MB (accumulators {heap[0].Accumulators / 1e6:0.0} MB / {heap[1].Accumulators / 1e6:0.0} MB) | " +
                $"{(double)heap[1].Heap / heap[0].Heap:0.00}× |");
        }
        Console.WriteLine();
        Console.WriteLine("Ratios are medians of whole passes over the same files; the evaluation also reads each mask, spills the full method's map to disk for the threshold pass, and writes metrics, plots and frames.csv.");
    }

    internal static string RepositoryRoot()
    {
        var dir = new DirectoryInfo(AppContext.BaseDirectory);
        while (dir is not null && !File.Exists(Path.Combine(dir.FullName, "Service.sln"))) dir = dir.Parent;
        return dir?.FullName ?? throw new InvalidOperationException("Repository root (Service.sln) not found above " + AppContext.BaseDirectory);
    }
}
