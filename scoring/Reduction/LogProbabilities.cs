using System.Numerics.Tensors;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Reduction;

/// <summary>
/// Turns a model's softmax probabilities [C,h,w] into clamped log-probabilities in place, so the reduction that
/// expects logits gives the exact predicted class, MSP and entropy: softmax(log p) = p when the p sum to 1.
/// Refuses outputs that are not probabilities (negative values, or classes that do not sum to about 1).
/// </summary>
public static class LogProbabilities
{
    /// <summary>Smallest probability kept before the logarithm: log(0) would poison every later sum.</summary>
    public const float Floor = 1e-30f;

    /// <summary>How far a pixel's class sum may stray from 1 (float32 softmax rounding, common practice).</summary>
    public const float SumTolerance = 1e-3f;

    /// <summary>Pixels whose class sum is checked; a sample keeps the check far cheaper than the reduction.</summary>
    public const int CheckedPixels = 64;

    public static void ConvertInPlace(Span<float> data, int channels, int height, int width)
    {
        int plane = height * width;
        if (channels < 1 || plane < 1 || data.Length != channels * plane)
            throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                $"Probabilities of shape [{channels}, {height}, {width}] need {(long)channels * plane} values; got {data.Length}.");
        float min = TensorPrimitives.Min(data);
        if (!(min >= 0) || !float.IsFinite(TensorPrimitives.Sum(data)))
            throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                $"output.kind is 'probabilities', but the output holds {(float.IsNaN(min) ? "NaN" : "negative values (lowest " + min.ToString(System.Globalization.CultureInfo.InvariantCulture) + ")")}: " +
                "these look like logits; set output.kind to 'logits' in descriptor.json.");
        int step = Math.Max(1, plane / CheckedPixels);
        for (int i = 0; i < plane; i += step)
        {
            double sum = 0;
            for (int c = 0; c < channels; c++) sum += data[c * plane + i];
            if (Math.Abs(sum - 1) > SumTolerance)
                throw new ScoringInputException(ScoringErrorCodes.LogitsShape,
                    $"output.kind is 'probabilities', but the classes of pixel {i} sum to {sum.ToString("0.#####", System.Globalization.CultureInfo.InvariantCulture)}, not 1: " +
                    "if the model ends without a softmax, set output.kind to 'logits' in descriptor.json.");
        }
        TensorPrimitives.Max(data, Floor, data);
        TensorPrimitives.Log(data, data);
    }
}
