namespace Strayspot.Service.Demo;

/// <summary>
/// The bundled demo segmentation network: fixed filters (<see cref="DemoFeatures"/>), standardized, then radial-basis
/// units around prototypes of the training features, then a linear softmax head without bias. Far from every prototype
/// all units fade and every logit tends to 0, a neutral "nothing recognized" output far below each class's typical max
/// logit, while partly familiar inputs (debris on pavement keeps the pavement context) lean to the surrounding class
/// with a low max logit, as in a trained network.
/// </summary>
public sealed class DemoModel
{
    public DemoModel(float[] featureMean, float[] featureStd, float[] centres, float bandwidth, float[] weights, int classCount)
    {
        int d = DemoFeatures.Count;
        if (featureMean.Length != d || featureStd.Length != d) throw new ArgumentException($"Feature mean/std need {d} values.");
        if (centres.Length == 0 || centres.Length % d != 0) throw new ArgumentException($"Centres must be a multiple of {d} values, got {centres.Length}.");
        if (!(bandwidth > 0)) throw new ArgumentOutOfRangeException(nameof(bandwidth), $"Bandwidth must be positive, got {bandwidth}.");
        CentreCount = centres.Length / d;
        if (classCount < 1 || weights.Length != classCount * CentreCount)
            throw new ArgumentException($"Weights have {weights.Length} values; expected {classCount}x{CentreCount}.");
        ClassCount = classCount;
        FeatureMean = featureMean;
        FeatureStd = featureStd;
        Centres = centres;
        Bandwidth = bandwidth;
        Weights = weights;
    }

    public int ClassCount { get; }
    public int CentreCount { get; }
    public float[] FeatureMean { get; }
    public float[] FeatureStd { get; }
    /// <summary>[CentreCount, DemoFeatures.Count], in standardized units.</summary>
    public float[] Centres { get; }
    public float Bandwidth { get; }
    /// <summary>[ClassCount, CentreCount].</summary>
    public float[] Weights { get; }

    /// <summary>Radial-basis activations of one standardized feature vector.</summary>
    public void Activations(ReadOnlySpan<float> standardized, Span<double> activations)
    {
        int d = DemoFeatures.Count;
        double scale = -1.0 / (2.0 * Bandwidth * Bandwidth);
        for (int k = 0; k < CentreCount; k++)
        {
            double dist = 0;
            for (int j = 0; j < d; j++)
            {
                double diff = standardized[j] - Centres[k * d + j];
                dist += diff * diff;
            }
            activations[k] = Math.Exp(dist * scale);
        }
    }

    public void Standardize(ReadOnlySpan<float> features, int pixels, int pixel, Span<float> standardized)
    {
        for (int j = 0; j < DemoFeatures.Count; j++)
            standardized[j] = (features[j * pixels + pixel] - FeatureMean[j]) / FeatureStd[j];
    }

    /// <summary>Logits [ClassCount, h, w] for features [DemoFeatures.Count, h, w], computed directly in double precision.</summary>
    public float[] Logits(ReadOnlySpan<float> features, int pixels)
    {
        var logits = new float[ClassCount * pixels];
        var source = features.ToArray();
        const int block = 1024;
        // Pixels are independent: blocks in parallel give the same values as one loop.
        Parallel.For(0, (pixels + block - 1) / block, b =>
        {
            Span<float> z = stackalloc float[DemoFeatures.Count];
            var a = new double[CentreCount];
            for (int p = b * block; p < Math.Min(pixels, (b + 1) * block); p++)
            {
                Standardize(source, pixels, p, z);
                Activations(z, a);
                for (int c = 0; c < ClassCount; c++)
                {
                    double sum = 0;
                    for (int k = 0; k < CentreCount; k++) sum += Weights[c * CentreCount + k] * a[k];
                    logits[c * pixels + p] = (float)sum;
                }
            }
        });
        return logits;
    }

    /// <summary>Convenience: logits at 1/4 resolution straight from an RGB frame.</summary>
    public float[] Logits(ApronFrame frame, out int height, out int width)
    {
        var input = DemoFeatures.ToInput(frame.Rgb, frame.Width, frame.Height);
        var features = DemoFeatures.Compute(input, frame.Height, frame.Width, out height, out width);
        return Logits(features, height * width);
    }
}
