using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Demo;

/// <summary>
/// Pixel metrics of the demo model on debris frames at frame resolution, through the scoring pipeline (logits resized to
/// the frame as in the service), one row per anomaly score.
/// </summary>
internal static class DemoFrameMetrics
{
    public enum Method { Msp, MaxLogit, Sml, SmlBoundary, SmlFull, SmlFullNarrow }

    public static IReadOnlyDictionary<Method, PixelMetricsResult> Measure(DemoModel model, IReadOnlyList<ApronDebrisFrame> frames,
        ClassStatistics statistics)
    {
        var methods = Enum.GetValues<Method>();
        var pipelines = methods.Select(m => new FramePipeline(Options(m), statistics)).ToArray();
        var metrics = methods.Select(_ => new ExactPixelMetrics()).ToArray();
        foreach (var df in frames)
        {
            var f = df.Frame;
            var logits = model.Logits(f, out int h, out int w);
            var view = new LogitsView(logits, model.ClassCount, h, w);
            for (int i = 0; i < methods.Length; i++)
                metrics[i].Add(pipelines[i].Score(view, f.Height, f.Width).AnomalyScore, df.AnomalyMask);
        }
        var result = new Dictionary<Method, PixelMetricsResult>();
        for (int i = 0; i < methods.Length; i++) result[methods[i]] = metrics[i].Compute();
        return result;
    }

    private static ScoringOptions Options(Method m)
    {
        bool boundary = m is Method.SmlBoundary or Method.SmlFull or Method.SmlFullNarrow;
        bool smoothing = m is Method.SmlFull or Method.SmlFullNarrow;
        return new ScoringOptions
        {
            Method = m switch { Method.Msp => ScoreMethod.Msp, Method.MaxLogit => ScoreMethod.MaxLogit, _ => ScoreMethod.Sml },
            // Narrow: the demo profile's boundary suppression (1 pixel, 1 round) for the demo model's sharp class edges.
            BoundarySuppression = m == Method.SmlFullNarrow
                ? new BoundarySuppressionOptions { Enabled = boundary, InitialWidth = 1, Iterations = 1 }
                : new BoundarySuppressionOptions { Enabled = boundary },
            // Narrow: dilation 2 reaches 6 pixels, which suits the demo's small debris at 1024x512; the default reaches 18.
            Smoothing = new SmoothingOptions { Enabled = smoothing, Dilation = m == Method.SmlFullNarrow ? 2 : new SmoothingOptions().Dilation },
        };
    }
}
