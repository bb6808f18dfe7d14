namespace Strayspot.Service.Frames;

/// <summary>A frame (image file or upload) the service cannot read: not a model error. Codes in <see cref="FrameErrorCodes"/>.</summary>
public sealed class FrameException(string code, string message, Exception? inner = null) : Scoring.CodedException(code, message, inner);

/// <summary>The stable codes of <see cref="FrameException"/>; never rename one.</summary>
public static class FrameErrorCodes
{
    /// <summary>Not an image format we read (or an empty file).</summary>
    public const string Format = "frame-format";
    public const string TooLarge = "frame-too-large";
    /// <summary>A known format whose data is damaged or truncated.</summary>
    public const string Corrupt = "frame-corrupt";
    /// <summary>A frame file or folder that is not there.</summary>
    public const string Missing = "frame-missing";
}
