using System.Diagnostics;
using System.Globalization;
using Spectre.Console;

namespace Strayspot.Service.Cli;

/// <summary>How far a run over many frames has come; <see cref="ResumedFrom"/> frames were done by an earlier run.</summary>
public readonly record struct FrameCount(int Done, int Total, int ResumedFrom = 0);

/// <summary>
/// A progress bar with frames/s and ETA on a terminal; one plain line at most every two seconds when output goes to
/// a file or pipe. Shared by every verb that walks frames.
/// </summary>
public static class FrameProgress
{
    public static T Run<T>(string label, int total, TextWriter stdout, Func<IProgress<FrameCount>, T> body)
    {
        bool interactive = !Console.IsOutputRedirected && stdout == Console.Out && AnsiConsole.Profile.Capabilities.Interactive;
        if (!interactive) return body(new PlainProgress(label, stdout));
        T result = default!;
        AnsiConsole.Progress()
            .AutoClear(false)
            .Columns(new TaskDescriptionColumn(), new ProgressBarColumn(), new PercentageColumn(), new RemainingTimeColumn(), new SpinnerColumn())
            .Start(ctx =>
            {
                var task = ctx.AddTask(label, maxValue: Math.Max(1, total));
                var rate = new RateClock();
                result = body(new Reporter(p =>
                {
                    task.Value = p.Done;
                    task.Description = string.Create(CultureInfo.InvariantCulture,
                        $"{label} {p.Done}/{p.Total} frames  {rate.FramesPerSecond(p):F1} frames/s");
                }));
            });
        return result;
    }

    private sealed class Reporter(Action<FrameCount> report) : IProgress<FrameCount>
    {
        public void Report(FrameCount value) => report(value);
    }

    private sealed class RateClock
    {
        private readonly Stopwatch _clock = Stopwatch.StartNew();

        /// <summary>Frames processed in this run (not the resumed ones) per second.</summary>
        public double FramesPerSecond(FrameCount p) =>
            _clock.Elapsed.TotalSeconds > 0 ? (p.Done - p.ResumedFrom) / _clock.Elapsed.TotalSeconds : 0;

        public TimeSpan? Remaining(FrameCount p)
        {
            double fps = FramesPerSecond(p);
            return fps > 0 ? TimeSpan.FromSeconds((p.Total - p.Done) / fps) : null;
        }
    }

    private sealed class PlainProgress(string label, TextWriter writer) : IProgress<FrameCount>
    {
        private readonly RateClock _rate = new();
        private readonly Stopwatch _sinceLast = Stopwatch.StartNew();
        private bool _first = true;

        public void Report(FrameCount p)
        {
            bool last = p.Done == p.Total;
            if (!_first && !last && _sinceLast.Elapsed < TimeSpan.FromSeconds(2)) return;
            if (_first && p.ResumedFrom > 0) writer.WriteLine($"Resuming after {p.ResumedFrom} frames from the checkpoint.");
            _first = false;
            _sinceLast.Restart();
            var eta = _rate.Remaining(p);
            writer.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"{label} {p.Done}/{p.Total} frames  {_rate.FramesPerSecond(p):F1} frames/s  ETA {(eta is { } t ? t.ToString(@"hh\:mm\:ss", CultureInfo.InvariantCulture) : "--:--:--")}"));
        }
    }
}
