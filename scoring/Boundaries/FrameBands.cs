using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Boundaries;

/// <summary>Shared plumbing of the per-frame stages: size checks and row bands run in parallel.</summary>
internal static class FrameBands
{
    /// <summary>Below this many pixels a frame is done on the calling thread: scheduling would cost more.</summary>
    private const int ParallelThreshold = 64 * 1024;

    public static void CheckSize(int width, int height, int length, string what)
    {
        if (width < 1 || height < 1)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize,
                $"A frame needs at least one row and column; got {width}×{height}.");
        if ((long)width * height != length)
            throw new ScoringInputException(ScoringErrorCodes.FrameSize,
                $"The {what} of a {width}×{height} frame must hold {(long)width * height} values; it holds {length}.");
    }

    /// <summary>Number of bands to split <paramref name="height"/> rows into (1 when the frame is small).</summary>
    public static int BandCount(int width, int height)
    {
        if ((long)width * height < ParallelThreshold || height < 2) return 1;
        // A few bands per core so a core that is busy elsewhere does not hold up the frame.
        return Math.Min(height, Environment.ProcessorCount * 4);
    }

    public static (int Start, int End) Band(int band, int bands, int height)
        => ((int)((long)height * band / bands), (int)((long)height * (band + 1) / bands));

    /// <summary>Runs <paramref name="body"/>(band, firstRow, endRow) over all bands, in parallel when worth it.</summary>
    public static void For(int bands, int height, Action<int, int, int> body)
    {
        if (bands == 1) { body(0, 0, height); return; }
        Parallel.For(0, bands, b =>
        {
            var (s, e) = Band(b, bands, height);
            if (s < e) body(b, s, e);
        });
    }
}
