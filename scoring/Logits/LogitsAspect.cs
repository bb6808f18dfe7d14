namespace Strayspot.Scoring.Logits;

/// <summary>
/// Whether logits fit the frame they are resized to. Logits with height and width swapped (64×128 onto a frame
/// 256 wide and 512 high) would be stretched silently; the command line and the logits endpoint refuse them here.
/// </summary>
public static class LogitsAspect
{
    /// <summary>
    /// True when some whole-cell stride explains both sides: each side of the logits may be off by one cell (rounding)
    /// and up to 10% (padding to a multiple before the model) from frame side ÷ stride.
    /// </summary>
    public static bool Agrees(int logitsHeight, int logitsWidth, int frameHeight, int frameWidth)
    {
        static (double Low, double High) Range(int frame, int logits) =>
            (frame / (logits + 1.0) / 1.1, frame / Math.Max(1.0, logits - 1.0) * 1.1);
        var (xl, xh) = Range(frameWidth, logitsWidth);
        var (yl, yh) = Range(frameHeight, logitsHeight);
        return Math.Max(xl, yl) <= Math.Min(xh, yh);
    }

    /// <summary>Throws <see cref="ScoringErrorCodes.LogitsAspect"/> unless the shapes agree.</summary>
    /// <param name="sizeGiven">How the caller gave the frame size (named in the message).</param>
    /// <param name="stretchGiven">How the caller says stretching is intended.</param>
    public static void EnsureAgrees(int logitsHeight, int logitsWidth, int frameHeight, int frameWidth, string sizeGiven, string stretchGiven)
    {
        if (Agrees(logitsHeight, logitsWidth, frameHeight, frameWidth)) return;
        throw new ScoringInputException(ScoringErrorCodes.LogitsAspect,
            $"The logits are {logitsWidth} wide × {logitsHeight} high but the frame is {frameWidth} wide × {frameHeight} high: their shapes disagree " +
            $"beyond rounding and padding (are height and width swapped? {sizeGiven}). Give {stretchGiven} if stretching them onto the frame is intended.");
    }
}
