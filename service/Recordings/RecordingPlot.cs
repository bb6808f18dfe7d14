using ScottPlot;

namespace Strayspot.Service.Recordings;

/// <summary>The frame score over time, with the threshold as a line and each kept track as a shaded span.</summary>
public static class RecordingPlot
{
    public static byte[] Render(RecordingReport report, IReadOnlyList<double> times, IReadOnlyList<double> scores)
    {
        var plot = new Plot();
        foreach (var t in report.Tracks)
        {
            if (!t.Kept) continue;
            // A one-frame span would be invisible: give it a sliver of width.
            double right = t.LastTime > t.FirstTime ? t.LastTime : t.FirstTime + Math.Max(0.02, report.DurationSeconds / 500);
            var span = plot.Add.HorizontalSpan(t.FirstTime, right);
            span.FillStyle.Color = Colors.Orange.WithAlpha(0.25);
            span.LineStyle.Width = 0;
        }
        if (times.Count > 0)
        {
            var line = plot.Add.ScatterLine(times.ToArray(), scores.ToArray());
            line.LineWidth = 1.5f;
            line.LegendText = "frame score";
        }
        var threshold = plot.Add.HorizontalLine(report.Threshold);
        threshold.LinePattern = LinePattern.Dashed;
        threshold.LegendText = $"threshold {report.Threshold:0.###}";
        plot.Title($"{report.Recording}: {report.FramesScored} frames, {report.TracksKept} track(s) kept of {report.TracksFound}");
        plot.XLabel("time (s)");
        plot.YLabel("frame score (highest anomaly score)");
        plot.ShowLegend(Alignment.UpperRight);
        return plot.GetImageBytes(1000, 420, ImageFormat.Png);
    }
}
