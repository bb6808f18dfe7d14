namespace Strayspot.Service.Demo;

/// <summary>How the demo model is fitted; defaults are the values the committed model was built with.</summary>
public sealed record DemoTrainingOptions
{
    /// <summary>Prototypes per class (k-means on that class's training features).</summary>
    public int CentresPerClass { get; init; } = 32;
    /// <summary>Radial-basis width in standardized feature units.</summary>
    public float Bandwidth { get; init; } = 1.6f;
    public int Steps { get; init; } = 250;
    public double LearningRate { get; init; } = 2.0;
    public double Momentum { get; init; } = 0.9;
    public double WeightDecay { get; init; } = 1e-4;
    /// <summary>Pixels (at logit resolution) the softmax head is fitted on.</summary>
    public int HeadSamples { get; init; } = 20000;
    /// <summary>Pixels per class the prototypes are clustered from.</summary>
    public int ClusterSamplesPerClass { get; init; } = 4000;
    public int KMeansIterations { get; init; } = 15;
    /// <summary>Share of each class's cluster and head samples drawn from cells next to another class.</summary>
    public double BoundaryShare { get; init; } = 0.5;
    /// <summary>Cells within this many cells of another class count as boundary cells.</summary>
    public int BoundaryReach { get; init; } = 1;
    public int Seed { get; init; } = 2718;
}

/// <summary>
/// Fits <see cref="DemoModel"/> on labelled frames. Single-threaded with fixed loop order and double accumulators so
/// the same frames and options give bit-identical weights.
/// </summary>
public static class DemoModelTrainer
{
    private const int GradientChunks = 8;

    public static DemoModel Train(IReadOnlyList<ApronFrame> frames, DemoTrainingOptions options)
    {
        if (frames.Count == 0) throw new ArgumentException("Training needs at least one frame.", nameof(frames));
        int d = DemoFeatures.Count, classes = ApronClasses.Count;
        var samples = new List<float>();
        var labels = new List<byte>();
        var nearEdge = new List<bool>();
        foreach (var f in frames)
        {
            var input = DemoFeatures.ToInput(f.Rgb, f.Width, f.Height);
            var feat = DemoFeatures.Compute(input, f.Height, f.Width, out int h, out int w);
            var cellLabels = DemoFeatures.CellLabels(f.Labels, f.Height, f.Width, classes);
            int m = h * w;
            for (int p = 0; p < m; p++)
            {
                if (cellLabels[p] >= classes) continue;
                for (int j = 0; j < d; j++) samples.Add(feat[j * m + p]);
                labels.Add(cellLabels[p]);
                nearEdge.Add(NearOtherClass(cellLabels, h, w, p, options.BoundaryReach, classes));
            }
        }
        int n = labels.Count;
        var x = samples.ToArray();
        var y = labels.ToArray();

        var mean = new float[d];
        var std = new float[d];
        for (int j = 0; j < d; j++)
        {
            double s = 0, s2 = 0;
            for (int i = 0; i < n; i++) { double v = x[i * d + j]; s += v; s2 += v * v; }
            double mu = s / n;
            mean[j] = (float)mu;
            std[j] = (float)Math.Sqrt(Math.Max(s2 / n - mu * mu, 1e-12));
        }
        for (int i = 0; i < n; i++)
            for (int j = 0; j < d; j++)
                x[i * d + j] = (x[i * d + j] - mean[j]) / std[j];

        var rng = new ApronRandom(options.Seed);
        var centres = new List<float>();
        for (int c = 0; c < classes; c++)
        {
            var members = new List<int>();
            for (int i = 0; i < n; i++) if (y[i] == c) members.Add(i);
            if (members.Count == 0) continue;
            var picked = Stratified(members, nearEdge, options.ClusterSamplesPerClass, options.BoundaryShare, rng);
            centres.AddRange(KMeans(x, d, picked, Math.Min(options.CentresPerClass, picked.Count), options.KMeansIterations, rng));
        }
        var centreArray = centres.ToArray();
        int k = centreArray.Length / d;

        var all = new List<int>(n);
        for (int i = 0; i < n; i++) all.Add(i);
        var head = Stratified(all, nearEdge, options.HeadSamples, options.BoundaryShare, rng);
        var probe = new DemoModel(mean, std, centreArray, options.Bandwidth, new float[classes * k], classes);
        int ns = head.Count;
        var phi = new double[ns * k];
        var target = new byte[ns];
        for (int s = 0; s < ns; s++)
        {
            probe.Activations(x.AsSpan(head[s] * d, d), phi.AsSpan(s * k, k));
            target[s] = y[head[s]];
        }
        var weights = FitSoftmax(phi, target, ns, k, classes, options);
        return new DemoModel(mean, std, centreArray, options.Bandwidth, weights, classes);
    }

    private static bool NearOtherClass(byte[] cells, int h, int w, int p, int reach, int classes)
    {
        int cy = p / w, cx = p % w;
        byte own = cells[p];
        for (int yy = Math.Max(0, cy - reach); yy <= Math.Min(h - 1, cy + reach); yy++)
            for (int xx = Math.Max(0, cx - reach); xx <= Math.Min(w - 1, cx + reach); xx++)
            {
                byte l = cells[yy * w + xx];
                if (l < classes && l != own) return true;
            }
        return false;
    }

    /// <summary>Up to <paramref name="count"/> items, <paramref name="edgeShare"/> of them (when available) from cells near another class.</summary>
    private static List<int> Stratified(List<int> items, List<bool> nearEdge, int count, double edgeShare, ApronRandom rng)
    {
        if (edgeShare <= 0 || items.Count <= count) return Subsample(items, count, rng);
        var edge = new List<int>();
        var inner = new List<int>();
        foreach (int i in items) (nearEdge[i] ? edge : inner).Add(i);
        int fromEdge = Math.Min(edge.Count, (int)Math.Round(count * edgeShare));
        var picked = Subsample(edge, fromEdge, rng);
        picked.AddRange(Subsample(inner, count - fromEdge, rng));
        return picked;
    }

    private static List<int> Subsample(List<int> items, int count, ApronRandom rng)
    {
        var copy = new List<int>(items);
        if (copy.Count <= count) return copy;
        for (int i = 0; i < count; i++)
        {
            int j = i + rng.Next(copy.Count - i);
            (copy[i], copy[j]) = (copy[j], copy[i]);
        }
        copy.RemoveRange(count, copy.Count - count);
        return copy;
    }

    /// <summary>k-means with k-means++ seeding over the given rows of <paramref name="x"/>.</summary>
    private static float[] KMeans(float[] x, int d, List<int> rows, int k, int iterations, ApronRandom rng)
    {
        var centres = new double[k * d];
        var nearest = new double[rows.Count];
        int first = rows[rng.Next(rows.Count)];
        for (int j = 0; j < d; j++) centres[j] = x[first * d + j];
        for (int i = 0; i < rows.Count; i++) nearest[i] = Dist(x, rows[i], d, centres, 0);
        for (int c = 1; c < k; c++)
        {
            double total = 0;
            for (int i = 0; i < rows.Count; i++) total += nearest[i];
            double pick = rng.NextDouble() * total;
            int chosen = rows.Count - 1;
            for (int i = 0; i < rows.Count; i++) { pick -= nearest[i]; if (pick <= 0) { chosen = i; break; } }
            for (int j = 0; j < d; j++) centres[c * d + j] = x[rows[chosen] * d + j];
            for (int i = 0; i < rows.Count; i++) nearest[i] = Math.Min(nearest[i], Dist(x, rows[i], d, centres, c));
        }
        var assign = new int[rows.Count];
        var sums = new double[k * d];
        var counts = new int[k];
        for (int it = 0; it < iterations; it++)
        {
            Array.Clear(sums);
            Array.Clear(counts);
            for (int i = 0; i < rows.Count; i++)
            {
                int best = 0;
                double bestDist = double.MaxValue;
                for (int c = 0; c < k; c++)
                {
                    double dist = Dist(x, rows[i], d, centres, c);
                    if (dist < bestDist) { bestDist = dist; best = c; }
                }
                assign[i] = best;
                counts[best]++;
                for (int j = 0; j < d; j++) sums[best * d + j] += x[rows[i] * d + j];
            }
            for (int c = 0; c < k; c++)
                if (counts[c] > 0)
                    for (int j = 0; j < d; j++) centres[c * d + j] = sums[c * d + j] / counts[c];
        }
        var result = new float[k * d];
        for (int i = 0; i < result.Length; i++) result[i] = (float)centres[i];
        return result;
    }

    private static double Dist(float[] x, int row, int d, double[] centres, int c)
    {
        double s = 0;
        for (int j = 0; j < d; j++) { double diff = x[row * d + j] - centres[c * d + j]; s += diff * diff; }
        return s;
    }

    /// <summary>
    /// Full-batch gradient descent with momentum on mean cross-entropy plus L2 decay on the weights. No bias: a learned
    /// bias becomes the answer wherever no unit fires, and would hand unfamiliar inputs to whichever class it favours.
    /// </summary>
    private static float[] FitSoftmax(double[] phi, byte[] target, int n, int k, int classes, DemoTrainingOptions o)
    {
        var w = new double[classes * k];
        var vw = new double[classes * k];
        // Fixed chunks summed in chunk order: the same bits on any core count.
        int chunks = GradientChunks;
        var partial = new double[chunks][];
        for (int i = 0; i < chunks; i++) partial[i] = new double[classes * k];
        for (int step = 0; step < o.Steps; step++)
        {
            Parallel.For(0, chunks, chunk =>
            {
                var gw = partial[chunk];
                Array.Clear(gw);
                Span<double> z = stackalloc double[classes];
                int from = (int)((long)n * chunk / chunks), to = (int)((long)n * (chunk + 1) / chunks);
                for (int i = from; i < to; i++)
                {
                    var row = phi.AsSpan(i * k, k);
                    double max = double.NegativeInfinity;
                    for (int c = 0; c < classes; c++)
                    {
                        double s = 0;
                        for (int j = 0; j < k; j++) s += w[c * k + j] * row[j];
                        z[c] = s;
                        if (s > max) max = s;
                    }
                    double total = 0;
                    for (int c = 0; c < classes; c++) { z[c] = Math.Exp(z[c] - max); total += z[c]; }
                    for (int c = 0; c < classes; c++)
                    {
                        double g = z[c] / total - (target[i] == c ? 1 : 0);
                        for (int j = 0; j < k; j++) gw[c * k + j] += g * row[j];
                    }
                }
            });
            for (int idx = 0; idx < w.Length; idx++)
            {
                double g = 0;
                for (int chunk = 0; chunk < chunks; chunk++) g += partial[chunk][idx];
                vw[idx] = o.Momentum * vw[idx] - o.LearningRate * (g / n + o.WeightDecay * w[idx]);
                w[idx] += vw[idx];
            }
        }
        var wf = new float[w.Length];
        for (int i = 0; i < w.Length; i++) wf[i] = (float)w[i];
        return wf;
    }
}
