namespace Strayspot.Scoring.Tracks;

/// <summary>
/// How regions of successive sampled frames are taken for one object.
/// A region continues a track when their boxes overlap by at least <see cref="MinimumOverlap"/> (intersection over
/// union) or their centroids lie within <see cref="MaximumCentroidShift"/> of the frame's diagonal of each other.
/// A track stays open through up to <see cref="MissedFrames"/> sampled frames without a sighting (the object hidden for
/// a moment, or its region under the threshold); after that a new sighting starts a new track.
/// </summary>
public sealed record TrackLinkOptions
{
    public double MinimumOverlap { get; init; } = 0.1;
    public double MaximumCentroidShift { get; init; } = 0.05;
    public int MissedFrames { get; init; } = 1;

    public void Validate()
    {
        if (!(MinimumOverlap > 0 && MinimumOverlap <= 1))
            throw new ArgumentOutOfRangeException(nameof(MinimumOverlap), MinimumOverlap, "The minimum overlap must lie in (0, 1].");
        if (!(MaximumCentroidShift >= 0 && MaximumCentroidShift <= 1))
            throw new ArgumentOutOfRangeException(nameof(MaximumCentroidShift), MaximumCentroidShift, "The centroid shift must lie in [0, 1] of the diagonal.");
        if (MissedFrames < 0)
            throw new ArgumentOutOfRangeException(nameof(MissedFrames), MissedFrames, "Missed frames cannot be negative.");
    }
}

/// <summary>
/// The persistence rule: an object seen in one frame only is more often noise than one seen in several, so keep the
/// tracks seen in at least <paramref name="MinimumFrames"/> sampled frames (1 keeps every track).
/// </summary>
public static class PersistenceRule
{
    public static IReadOnlyList<Track> Keep(IReadOnlyList<Track> tracks, int minimumFrames)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(minimumFrames, 1);
        var kept = new List<Track>(tracks.Count);
        foreach (var t in tracks)
            if (t.FramesSeen >= minimumFrames) kept.Add(t);
        return kept;
    }
}
