using OpenCvSharp;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Bench;

/// <summary>
/// The post-hoc chain (reduction with resize, SML, boundary suppression, dilated smoothing, mask, regions) against
/// the same chain written with OpenCV (OpenCvSharp4) on the same logits: every channel resized, argmax by compare and
/// masked copy, SML through look-up tables, boundaries as dilate ≠ erode of the class map, the 3×3 masked mean as
/// two unnormalized box filters, the dilated Gaussian as one separable filter with zeros between its taps,
/// threshold and connected components with statistics. The OpenCV side stops at OpenCV's own component statistics
/// (box, area, centroid): the per-region score and class statistics our chain also computes are not charged to it.
/// </summary>
public static class PostHocChainBench
{
    private const int Classes = 19;

    /// <returns>OpenCV / ours per case and kind of logits, for the goals summary.</returns>
    public static List<(string Case, string Kind, double Ratio)> Run(int runs)
    {
        var ratios = new List<(string, string, double)>();
        var stats = ScoringBench.Statistics(Classes);
        var options = new ScoringOptions { Method = Strayspot.Scoring.Pipeline.ScoreMethod.Sml };
        // Both sides get the same threads: DOTNET_PROCESSOR_COUNT=1 compares them on one core.
        Cv2.SetNumThreads(Environment.ProcessorCount);
        Console.WriteLine();
        Console.WriteLine($"Post-hoc chain against OpenCV {Cv2.GetVersionString()} ({Cv2.GetNumThreads()} OpenCV threads, {Environment.ProcessorCount} .NET processors), C={Classes}, SML + boundary suppression + dilated smoothing + regions.");
        Console.WriteLine();
        Console.WriteLine("| case | logits | ours | OpenCV | OpenCV / ours | ours: reduction, SML, BS, DS, regions | memory floor of the reduction: read logits, + write maps | max score difference, mask pixels differing, components (ours/OpenCV) |");
        Console.WriteLine("|---|---|---|---|---|---|---|---|");
        foreach (var (label, h, w, fh, fw) in new[] { ("A: 256×512 → 1024×2048", 256, 512, 1024, 2048), ("B: 512×1024 at frame size", 512, 1024, 512, 1024) })
        {
            ratios.Add((label, "smooth", Case(label, "smooth, network-like", SyntheticLogits.Make(Classes, h, w, seed: 7), h, w, fh, fw, options, stats, runs)));
            ratios.Add((label, "random-like", Case(label, "random-like", RandomLogits(Classes, h, w, seed: 8), h, w, fh, fw, options, stats, runs)));
        }
        Console.WriteLine();
        Console.WriteLine("Times are medians in ms of alternating runs (ours, OpenCV, ours, …) after two warm-up runs of each. The threshold");
        Console.WriteLine("flags the top 5% of each frame's anomaly scores. Score differences come from float rounding and from argmax");
        Console.WriteLine("near-ties after resizing; the masks must agree. The memory floor is no chain: the same threads only read every");
        Console.WriteLine("logit once (vector sums, rows in bands as the reduction splits them), then also write the class and max-logit maps");
        Console.WriteLine("(6 bytes a pixel); no reduction can beat it, whatever its arithmetic.");
        return ratios;
    }

    /// <summary>Independent noise per pixel and class: every pixel sits on a class boundary, the worst case for BS and regions.</summary>
    public static float[] RandomLogits(int channels, int height, int width, int seed)
    {
        var rng = new Random(seed);
        var data = new float[channels * height * width];
        for (int i = 0; i < data.Length; i++) data[i] = (float)(6 + 4 * rng.NextDouble());
        return data;
    }

    /// <summary>
    /// Reads every logit once with the reduction's threads and band split (a vector sum per band, so the reads cannot
    /// be skipped); with <paramref name="maxMap"/> and <paramref name="classMap"/> also writes the frame's two maps.
    /// </summary>
    private static unsafe float ReadFloor(float[] data, int channels, int plane, float[]? maxMap, ushort[]? classMap)
    {
        int threads = Environment.ProcessorCount, bands = threads * 4;
        var sums = new float[bands];
        fixed (float* p = data)
        {
            nint src = (nint)p;
            Parallel.For(0, bands, new ParallelOptions { MaxDegreeOfParallelism = threads }, b =>
            {
                long s0 = (long)plane * b / bands / 64 * 64, s1 = b == bands - 1 ? plane : (long)plane * (b + 1) / bands / 64 * 64;
                var acc0 = System.Numerics.Vector<float>.Zero;
                var acc1 = System.Numerics.Vector<float>.Zero;
                int lanes = System.Numerics.Vector<float>.Count;
                for (int c = 0; c < channels; c++)
                {
                    float* q = (float*)src + (long)c * plane;
                    long x = s0;
                    for (; x + 2 * lanes <= s1; x += 2 * lanes)
                    {
                        acc0 += System.Numerics.Vector.Load(q + x);
                        acc1 += System.Numerics.Vector.Load(q + x + lanes);
                    }
                    for (; x < s1; x++) acc0 += new System.Numerics.Vector<float>(q[x]);
                }
                sums[b] = System.Numerics.Vector.Sum(acc0 + acc1);
                if (maxMap is null || classMap is null) return;
                long o0 = (long)maxMap.Length * b / bands, o1 = (long)maxMap.Length * (b + 1) / bands;
                maxMap.AsSpan((int)o0, (int)(o1 - o0)).Fill(sums[b]);
                classMap.AsSpan((int)o0, (int)(o1 - o0)).Fill((ushort)b);
            });
        }
        return sums.Sum();
    }

    private static double Case(string label, string kind, float[] data, int h, int w, int fh, int fw,
        ScoringOptions options, ClassStatistics stats, int runs)
    {
        var logits = new LogitsView(data, Classes, h, w);
        // The threshold flags the top 5% of the frame's scores, so both sides find and describe real regions.
        var probe = new FramePipeline(options, stats).Score(logits, fh, fw).AnomalyScore.ToArray();
        Array.Sort(probe);
        options = options with { Threshold = probe[(int)(probe.Length * 0.95)] };
        var pipeline = new FramePipeline(options, stats);
        using var cv = new OpenCvChain(data, Classes, h, w, fh, fw, options, new StandardizedMaxLogit(stats));

        var ours = new List<double>(runs);
        var theirs = new List<double>(runs);
        var floorRead = new List<double>(runs);
        var floorWrite = new List<double>(runs);
        var maxMap = GC.AllocateUninitializedArray<float>(fh * fw, pinned: true);
        var classMap = GC.AllocateUninitializedArray<ushort>(fh * fw, pinned: true);
        var stage = new List<double>[5];
        for (int i = 0; i < stage.Length; i++) stage[i] = new List<double>(runs);
        for (int i = 0; i < runs + 2; i++)
        {
            long t = System.Diagnostics.Stopwatch.GetTimestamp();
            var s = pipeline.Score(logits, fh, fw);
            double a = System.Diagnostics.Stopwatch.GetElapsedTime(t).TotalMilliseconds;
            t = System.Diagnostics.Stopwatch.GetTimestamp();
            cv.Run();
            double b = System.Diagnostics.Stopwatch.GetElapsedTime(t).TotalMilliseconds;
            t = System.Diagnostics.Stopwatch.GetTimestamp();
            ReadFloor(data, Classes, h * w, null, null);
            double f = System.Diagnostics.Stopwatch.GetElapsedTime(t).TotalMilliseconds;
            t = System.Diagnostics.Stopwatch.GetTimestamp();
            ReadFloor(data, Classes, h * w, maxMap, classMap);
            double g = System.Diagnostics.Stopwatch.GetElapsedTime(t).TotalMilliseconds;
            if (i < 2) continue;
            floorRead.Add(f);
            floorWrite.Add(g);
            ours.Add(a);
            theirs.Add(b);
            stage[0].Add(s.Timings.Reduction.TotalMilliseconds);
            stage[1].Add(s.Timings.Standardization.TotalMilliseconds);
            stage[2].Add(s.Timings.BoundarySuppression.TotalMilliseconds);
            stage[3].Add(s.Timings.Smoothing.TotalMilliseconds);
            stage[4].Add(s.Timings.Regions.TotalMilliseconds);
        }

        // Same answer check: the last frame of each side.
        var last = pipeline.Score(logits, fh, fw);
        cv.Run();
        var (maxDiff, maskDiff) = cv.Compare(last.AnomalyScore, last.Mask);
        double o = Measure.Median(ours), c = Measure.Median(theirs);
        string stages = string.Join(", ", stage.Select(x => Measure.Median(x).ToString("0.0")));
        Console.WriteLine($"| {label} | {kind} | {o:0.0} | {c:0.0} | **{c / o:0.0}×** | {stages} | {Measure.Median(floorRead):0.0}, {Measure.Median(floorWrite):0.0} | {maxDiff:0.0e0}, {maskDiff}, {last.Regions.ComponentsFound}/{cv.Components} |");
        return c / o;
    }

    /// <summary>The chain in OpenCV calls. Mats are made once and reused, as a tuned OpenCV program would.</summary>
    private sealed class OpenCvChain : IDisposable
    {
        private readonly Mat[] _channels;
        private readonly Mat[] _resized;
        private readonly Mat _max = new(), _cls = new(), _greater = new(), _mean = new(), _inv = new(), _score = new();
        private readonly Mat _meanLut, _invLut, _gauss;
        private readonly Mat _hi = new(), _lo = new(), _boundary = new(), _keep = new(), _keepF = new(), _masked = new(), _sum = new(), _count = new(),
            _avg = new(), _positive = new(), _change = new(), _smoothed = new(), _mask = new(), _labels = new(), _stats = new(), _centroids = new();
        private readonly int _fh, _fw;
        private readonly ScoringOptions _options;
        private readonly List<Mat> _squares = [];

        public OpenCvChain(float[] data, int classes, int h, int w, int fh, int fw, ScoringOptions options, StandardizedMaxLogit sml)
        {
            _fh = fh; _fw = fw; _options = options;
            _channels = new Mat[classes];
            _resized = new Mat[classes];
            for (int c = 0; c < classes; c++)
            {
                _channels[c] = Mat.FromPixelData(h, w, MatType.CV_32FC1, data.AsSpan(c * h * w, h * w).ToArray()).Clone();
                _resized[c] = new Mat();
            }
            var meanTable = new float[256];
            var invTable = new float[256];
            var probe = new float[1];
            for (int c = 0; c < classes; c++)
            {
                // The tables come from the stage's own numbers: SML(x) = (x − mean)·inv, so x = 0 and x = 1 give them.
                sml.Apply([0f], [(ushort)c], probe);
                float minusMeanTimesInv = probe[0];
                sml.Apply([1f], [(ushort)c], probe);
                invTable[c] = probe[0] - minusMeanTimesInv;
                meanTable[c] = -minusMeanTimesInv / invTable[c];
            }
            _meanLut = Mat.FromPixelData(1, 256, MatType.CV_32FC1, meanTable).Clone();
            _invLut = Mat.FromPixelData(1, 256, MatType.CV_32FC1, invTable).Clone();

            var s = options.Smoothing;
            int half = (s.KernelSize - 1) / 2, span = 2 * half * s.Dilation + 1;
            var taps = new double[s.KernelSize];
            double total = 0;
            for (int i = -half; i <= half; i++) total += taps[i + half] = Math.Exp(-(double)i * i / (2 * s.Sigma * s.Sigma));
            var dilated = new float[span];
            for (int i = 0; i < s.KernelSize; i++) dilated[i * s.Dilation] = (float)(taps[i] / total);
            _gauss = Mat.FromPixelData(span, 1, MatType.CV_32FC1, dilated).Clone();
            for (int i = 0; i < options.BoundarySuppression.Iterations; i++)
            {
                int r = options.BoundarySuppression.WidthAt(i);
                _squares.Add(Cv2.GetStructuringElement(MorphShapes.Rect, new Size(2 * r + 1, 2 * r + 1)));
            }
        }

        public int Components { get; private set; }

        public void Run()
        {
            var size = new Size(_fw, _fh);
            for (int c = 0; c < _channels.Length; c++)
                Cv2.Resize(_channels[c], _resized[c], size, 0, 0, InterpolationFlags.Linear);

            // Argmax, lowest index on ties: a class takes over only where it is strictly greater.
            _resized[0].CopyTo(_max);
            _cls.Create(_fh, _fw, MatType.CV_8UC1);
            _cls.SetTo(Scalar.All(0));
            for (int c = 1; c < _resized.Length; c++)
            {
                Cv2.Compare(_resized[c], _max, _greater, CmpTypes.GT);
                _cls.SetTo(Scalar.All(c), _greater);
                Cv2.Max(_max, _resized[c], _max);
            }

            Cv2.LUT(_cls, _meanLut, _mean);
            Cv2.LUT(_cls, _invLut, _inv);
            Cv2.Subtract(_mean, _max, _score); // −(max − mean)·inv: higher = more anomalous
            Cv2.Multiply(_score, _inv, _score);

            foreach (var square in _squares)
            {
                // Some pixel within Chebyshev distance r has another class ⇔ max ≠ min over the (2r+1)² square.
                Cv2.Dilate(_cls, _hi, square, borderType: BorderTypes.Replicate);
                Cv2.Erode(_cls, _lo, square, borderType: BorderTypes.Replicate);
                Cv2.Compare(_hi, _lo, _boundary, CmpTypes.NE);
                Cv2.Compare(_hi, _lo, _keep, CmpTypes.EQ);
                _keep.ConvertTo(_keepF, MatType.CV_32FC1, 1.0 / 255);
                Cv2.Multiply(_score, _keepF, _masked);
                Cv2.BoxFilter(_masked, _sum, MatType.CV_32F, new Size(3, 3), normalize: false, borderType: BorderTypes.Constant);
                Cv2.BoxFilter(_keepF, _count, MatType.CV_32F, new Size(3, 3), normalize: false, borderType: BorderTypes.Constant);
                Cv2.Divide(_sum, _count, _avg);
                Cv2.Compare(_count, Scalar.All(0), _positive, CmpTypes.GT);
                Cv2.BitwiseAnd(_boundary, _positive, _change);
                _avg.CopyTo(_score, _change);
            }

            Cv2.SepFilter2D(_score, _smoothed, MatType.CV_32F, _gauss, _gauss, borderType: BorderTypes.Replicate);
            Cv2.Compare(_smoothed, Scalar.All(_options.Threshold), _mask, CmpTypes.GT);
            Components = Cv2.ConnectedComponentsWithStats(_mask, _labels, _stats, _centroids, PixelConnectivity.Connectivity8, MatType.CV_32S) - 1;
            Cv2.MinMaxLoc(_smoothed, out double _, out double _);
        }

        public (double MaxDiff, long MaskDiff) Compare(ReadOnlySpan<float> score, ReadOnlySpan<byte> mask)
        {
            _smoothed.GetArray(out float[] s);
            _mask.GetArray(out byte[] m);
            double maxDiff = 0;
            long maskDiff = 0;
            for (int i = 0; i < s.Length; i++)
            {
                maxDiff = Math.Max(maxDiff, Math.Abs(s[i] - score[i]));
                if ((m[i] != 0) != (mask[i] != 0)) maskDiff++;
            }
            return (maxDiff, maskDiff);
        }

        public void Dispose()
        {
            foreach (var m in _channels) m.Dispose();
            foreach (var m in _resized) m.Dispose();
            foreach (var m in _squares) m.Dispose();
            foreach (var m in new[] { _max, _cls, _greater, _mean, _inv, _score, _meanLut, _invLut, _gauss, _hi, _lo, _boundary, _keep, _keepF,
                         _masked, _sum, _count, _avg, _positive, _change, _smoothed, _mask, _labels, _stats, _centroids })
                m.Dispose();
        }
    }
}
