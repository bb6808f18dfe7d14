using System.Globalization;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Scoring.Reduction;
using Strayspot.Service.Frames;

namespace Strayspot.Service.Models;

/// <summary>One way of feeding the model: the descriptor as written or one plausible alternative.</summary>
public sealed record InputVariant(string Name, InputDescriptor Input, bool AsWritten);

/// <summary>What the model predicted over the sample frames under one variant.</summary>
public sealed record InputVariantResult(InputVariant Variant, double MeanMaxSoftmax, IReadOnlyList<double> ClassShares)
{
    /// <summary>Share of pixels on the two most predicted classes.</summary>
    public double TopTwoShare => ClassShares.OrderDescending().Take(2).Sum();
}

public sealed record InputCheckResult(int Frames, IReadOnlyList<InputVariantResult> Variants, IReadOnlyList<string> Warnings);

/// <summary>
/// A rule of thumb for catching wrong preprocessing: runs the model over a few of the user's frames with the descriptor
/// as written and with plausible alternatives (value scale 1 vs 255, RGB vs BGR, normalization on or off), and compares
/// how confident the model is (mean max-softmax) and how its predictions spread over the classes. A model fed the way
/// it was trained is usually the most confident and uses several classes; neither is proof.
/// </summary>
public static class InputCheck
{
    /// <summary>Another variant more confident than the written one by more than this is warned about.</summary>
    public const double ConfidenceMargin = 0.02;
    /// <summary>Predictions this concentrated on one or two classes are warned about (for models with more than 3 classes).</summary>
    public const double CollapseShare = 0.95;

    public static IReadOnlyList<InputVariant> Variants(InputDescriptor written, IReadOnlyList<DecodedFrame> frames)
    {
        var list = new List<InputVariant> { new("as written", written, true) };
        float otherScale = written.ValueScale == 1f ? 255f : 1f;
        list.Add(new($"valueScale {otherScale.ToString(CultureInfo.InvariantCulture)}", written with { ValueScale = otherScale }, false));
        string otherOrder = written.ChannelOrder == "bgr" ? "rgb" : "bgr";
        list.Add(new($"channelOrder {otherOrder}", written with { ChannelOrder = otherOrder }, false));
        bool neutral = written.Mean.All(m => m == 0f) && written.Std.All(s => s == 1f);
        if (!neutral)
            list.Add(new("normalization off (mean 0, std 1)", written with { Mean = [0f, 0f, 0f], Std = [1f, 1f, 1f] }, false));
        else
        {
            var (mean, std) = FrameStatistics(frames, written.ValueScale, written.ChannelOrder == "bgr");
            list.Add(new("normalization on (the frames' own mean and std)", written with { Mean = mean, Std = std }, false));
        }
        return list;
    }

    public static InputCheckResult Run(SegmentationModel model, IReadOnlyList<DecodedFrame> frames)
    {
        var results = new List<InputVariantResult>();
        var reduction = new PixelReduction(ReductionOutputs.Msp);
        var maps = new ReducedMaps();
        foreach (var variant in Variants(model.Descriptor.Input, frames))
        {
            var preprocessor = new FramePreprocessor(variant.Input);
            var counts = new long[model.ClassCount];
            double mspSum = 0;
            long pixels = 0;
            float[]? crop = null;
            foreach (var frame in frames)
            {
                var input = preprocessor.Prepare(frame);
                using var lease = model.Run(input);
                var logits = input.Box.CropToContent(lease.View, ref crop);
                // At the logits' own size: the check is about the model's answers, not the frame's resolution.
                maps.EnsureSize(logits.Width, logits.Height, ReductionOutputs.Msp);
                reduction.Reduce(logits, logits.Height, logits.Width, maps);
                var classes = maps.ClassIndex;
                var msp = maps.Msp;
                for (int i = 0; i < classes.Length; i++)
                {
                    counts[classes[i]]++;
                    mspSum += msp[i];
                }
                pixels += classes.Length;
            }
            results.Add(new InputVariantResult(variant, pixels == 0 ? 0 : mspSum / pixels,
                counts.Select(c => pixels == 0 ? 0 : (double)c / pixels).ToList()));
        }
        return new InputCheckResult(frames.Count, results, Warnings(results, model.ClassCount));
    }

    private static List<string> Warnings(List<InputVariantResult> results, int classes)
    {
        var warnings = new List<string>();
        var written = results[0];
        var best = results.MaxBy(r => r.MeanMaxSoftmax)!;
        if (!ReferenceEquals(best, written) && best.MeanMaxSoftmax > written.MeanMaxSoftmax + ConfidenceMargin)
            warnings.Add(string.Create(CultureInfo.InvariantCulture,
                $"The model is more confident with '{best.Variant.Name}' (mean max-softmax {best.MeanMaxSoftmax:0.000}) than with the descriptor as written ({written.MeanMaxSoftmax:0.000}): check that field against how the model was trained."));
        if (classes > 3 && written.TopTwoShare > CollapseShare)
            warnings.Add(string.Create(CultureInfo.InvariantCulture,
                $"As written, {100 * written.TopTwoShare:0.#}% of pixels fall on one or two of {classes} classes: predictions have collapsed, which usually means wrong preprocessing (or frames unlike the training's)."));
        return warnings;
    }

    /// <summary>Per-channel mean and std of the frames' pixels after the value scale, in the model's channel order.</summary>
    private static (float[] Mean, float[] Std) FrameStatistics(IReadOnlyList<DecodedFrame> frames, float valueScale, bool bgr)
    {
        var sum = new double[3];
        var squares = new double[3];
        long n = 0;
        foreach (var frame in frames)
            frame.Image.ProcessPixelRows(rows =>
            {
                for (int y = 0; y < rows.Height; y++)
                    foreach (ref Rgb24 p in rows.GetRowSpan(y))
                    {
                        double r = p.R / valueScale, g = p.G / valueScale, b = p.B / valueScale;
                        sum[0] += r; sum[1] += g; sum[2] += b;
                        squares[0] += r * r; squares[1] += g * g; squares[2] += b * b;
                        n++;
                    }
            });
        var mean = new float[3];
        var std = new float[3];
        for (int c = 0; c < 3; c++)
        {
            double m = sum[c] / Math.Max(1, n);
            mean[c] = (float)m;
            std[c] = (float)Math.Max(1e-3, Math.Sqrt(Math.Max(0, squares[c] / Math.Max(1, n) - m * m)));
        }
        if (bgr) { (mean[0], mean[2]) = (mean[2], mean[0]); (std[0], std[2]) = (std[2], std[0]); }
        return (mean, std);
    }
}
