using System.Globalization;

namespace Strayspot.Service.Recordings;

/// <summary>
/// Which frames of a recording are scored: every frame, every <c>N</c>th (frames 0, N, 2N… of the decoded
/// sequence), or about <c>R</c> per second (a frame is taken when at least 1/R s has passed since the last taken
/// one, so a variable frame rate keeps each frame's own timestamp).
/// </summary>
public sealed record RecordingSampling
{
    public int EveryNth { get; private init; } = 1;
    public double PerSecond { get; private init; }

    public static readonly RecordingSampling EveryFrame = new();

    public static RecordingSampling Every(int n) =>
        n >= 1 ? new() { EveryNth = n } : throw new ArgumentOutOfRangeException(nameof(n), n, "Every Nth frame needs N ≥ 1.");

    public static RecordingSampling Rate(double perSecond) =>
        perSecond > 0 && double.IsFinite(perSecond)
            ? new() { PerSecond = perSecond }
            : throw new ArgumentOutOfRangeException(nameof(perSecond), perSecond, "Frames per second must be a positive number.");

    /// <summary>The ffmpeg <c>select</c> expression, or null when every frame is taken.</summary>
    internal string? SelectExpression() =>
        PerSecond > 0
            // A thousandth of the interval absorbs timestamp rounding in the container's time base.
            ? string.Create(CultureInfo.InvariantCulture, $"isnan(prev_selected_t)+gte(t-prev_selected_t\\,{0.999 / PerSecond:R})")
            : EveryNth > 1 ? string.Create(CultureInfo.InvariantCulture, $"not(mod(n\\,{EveryNth}))") : null;

    /// <summary>The same rule for sequences whose frames are in hand (image sequences).</summary>
    internal bool Takes(long index, double time, double? lastTakenTime) =>
        PerSecond > 0 ? lastTakenTime is not { } last || time - last >= 0.999 / PerSecond : index % EveryNth == 0;

    public override string ToString() =>
        PerSecond > 0 ? string.Create(CultureInfo.InvariantCulture, $"{PerSecond:R} per second") : EveryNth > 1 ? $"1 frame in {EveryNth}" : "every frame";
}
