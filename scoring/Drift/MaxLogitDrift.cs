using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Standardization;

namespace Strayspot.Scoring.Drift;

/// <summary>One class's production statistics next to its calibration.</summary>
public sealed record ClassDrift(
    string Name,
    double PixelWeight,
    double Mean,
    double Std,
    double CalibratedMean,
    double CalibratedStd,
    /// <summary>(production mean − calibrated mean) / calibrated std.</summary>
    double Shift,
    /// <summary>Production std / calibrated std.</summary>
    double StdRatio);

/// <summary>Where production stands against the calibration; <see cref="Overall"/> is in calibrated standard deviations.</summary>
public sealed record DriftReport(long Frames, double HalfLifeFrames, double Overall, double WarningLevel, bool Warning,
    IReadOnlyList<ClassDrift> Classes);

/// <summary>
/// Watches the max logit in production against the calibration. Per class it keeps exponentially weighted sums of
/// pixel count, max logit and its square, decayed once per frame with the given half-life in frames, so recent frames
/// count most and old ones fade. A class's shift is its production mean's distance from the calibrated mean in
/// calibrated standard deviations; the overall figure is the pixel-weighted root mean square of the shifts. A fleet
/// that now sees what the calibration never described (night, rain, a new site) moves it; then recalibrate.
/// Not thread-safe: the caller serializes <see cref="Observe"/>.
/// </summary>
public sealed class MaxLogitDrift
{
    private readonly ClassStatistics _calibration;
    private readonly double _decay;
    private readonly double[] _weight, _sum, _squares;
    private readonly long[] _frameCounts;
    private readonly double[] _frameSums, _frameSquares;
    private long _frames;

    /// <param name="halfLifeFrames">frames after which a frame's weight has halved; infinity keeps every frame equally.</param>
    /// <param name="warningLevel">overall drift, in calibrated standard deviations, at which <see cref="DriftReport.Warning"/> is raised.</param>
    public MaxLogitDrift(ClassStatistics calibration, double halfLifeFrames = 500, double warningLevel = 1.0)
    {
        if (!(halfLifeFrames > 0))
            throw new ScoringInputException(ScoringErrorCodes.Options, $"The drift half-life must be positive; got {halfLifeFrames}.");
        if (!(warningLevel > 0) || !double.IsFinite(warningLevel))
            throw new ScoringInputException(ScoringErrorCodes.Options, $"The drift warning level must be positive; got {warningLevel}.");
        _calibration = calibration;
        HalfLifeFrames = halfLifeFrames;
        WarningLevel = warningLevel;
        _decay = double.IsPositiveInfinity(halfLifeFrames) ? 1.0 : Math.Pow(0.5, 1.0 / halfLifeFrames);
        int c = calibration.Count;
        _weight = new double[c]; _sum = new double[c]; _squares = new double[c];
        _frameCounts = new long[c]; _frameSums = new double[c]; _frameSquares = new double[c];
    }

    public double HalfLifeFrames { get; }
    public double WarningLevel { get; }

    /// <summary>Adds one frame's max logit and predicted class per pixel.</summary>
    public void Observe(ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex)
    {
        if (maxLogit.Length != classIndex.Length)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize, $"Max-logit map has {maxLogit.Length} pixels, class map {classIndex.Length}.");
        Array.Clear(_frameCounts); Array.Clear(_frameSums); Array.Clear(_frameSquares);
        int classes = _weight.Length;
        // Neighbouring pixels mostly share a class: a run's sums stay in registers and are stored once, instead of a
        // load and store per pixel. Each sum still takes its pixels in order, so the result is bit for bit the same.
        int n = maxLogit.Length, i = 0;
        while (i < n)
        {
            int c = classIndex[i];
            if (c >= classes) { i++; continue; }
            long count = _frameCounts[c];
            double sum = _frameSums[c], squares = _frameSquares[c];
            do
            {
                double v = maxLogit[i];
                count++;
                sum += v;
                squares += v * v;
                i++;
            } while (i < n && classIndex[i] == c);
            _frameCounts[c] = count;
            _frameSums[c] = sum;
            _frameSquares[c] = squares;
        }
        for (int c = 0; c < classes; c++)
        {
            _weight[c] = _decay * _weight[c] + _frameCounts[c];
            _sum[c] = _decay * _sum[c] + _frameSums[c];
            _squares[c] = _decay * _squares[c] + _frameSquares[c];
        }
        _frames++;
    }

    public DriftReport Report()
    {
        var classes = new List<ClassDrift>(_weight.Length);
        double weighted = 0, total = 0;
        for (int c = 0; c < _weight.Length; c++)
        {
            var cal = _calibration.Classes[c];
            if (_weight[c] <= 0 || cal.Std < ClassStatistics.MinimumStd || cal.Count < _calibration.MinimumCount)
            {
                classes.Add(new ClassDrift(cal.Name, _weight[c], double.NaN, double.NaN, cal.Mean, cal.Std, 0, double.NaN));
                continue;
            }
            double mean = _sum[c] / _weight[c];
            double std = Math.Sqrt(Math.Max(0, _squares[c] / _weight[c] - mean * mean));
            double shift = (mean - cal.Mean) / cal.Std;
            classes.Add(new ClassDrift(cal.Name, _weight[c], mean, std, cal.Mean, cal.Std, shift, std / cal.Std));
            weighted += _weight[c] * shift * shift;
            total += _weight[c];
        }
        double overall = total > 0 ? Math.Sqrt(weighted / total) : 0;
        return new DriftReport(_frames, HalfLifeFrames, overall, WarningLevel, overall >= WarningLevel, classes);
    }
}
