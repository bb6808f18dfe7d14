namespace Strayspot.Scoring.Tracks;

/// <summary>
/// One sighting of a track: the region <paramref name="RegionId"/> of the sampled frame <paramref name="Sample"/>
/// (position in the sampled sequence), which is frame <paramref name="FrameIndex"/> of the recording at
/// <paramref name="TimeSeconds"/>.
/// </summary>
public sealed record TrackSighting(int Sample, long FrameIndex, double TimeSeconds, int RegionId,
    int Left, int Top, int Width, int Height, long Area, double CentroidX, double CentroidY,
    float MaxScore, float MeanScore, int MajorityClass);

/// <summary>
/// Regions of consecutive sampled frames taken for one object. <see cref="MaxScore"/> is the highest region score
/// over the sightings; <see cref="MeanScore"/> is the area-weighted mean of the sightings' mean scores (every pixel
/// of every sighting counts once). <see cref="ClassBeneath"/> is the class under most of the track's pixels summed over
/// its sightings (the smaller index on a tie). <see cref="Best"/> is the sighting with the highest region score
/// (the earliest on a tie).
/// </summary>
public sealed record Track(int Id, IReadOnlyList<TrackSighting> Sightings, float MaxScore, float MeanScore,
    int ClassBeneath, TrackSighting Best)
{
    public TrackSighting First => Sightings[0];
    public TrackSighting Last => Sightings[^1];
    public int FramesSeen => Sightings.Count;
    public double FirstTime => First.TimeSeconds;
    public double LastTime => Last.TimeSeconds;
}
