using Strayspot.Service.Recordings;

namespace Strayspot.Service.Demo;

/// <summary>Track-level counts on a drive-by. An object counts as in view when all its pixels are inside at least 3 sampled frames.</summary>
public sealed record TrackCounts(int InView, int Found, int Missed, int False)
{
    public override string ToString() => $"{InView} in view, {Found} found, {Missed} missed, {False} false";
}

/// <summary>Judges a recording's tracks against the drive-by's known debris (the demo's ground truth).</summary>
public static class DriveByJudge
{
    /// <summary>
    /// A track belongs to the object under the centroid of most of its sightings' boxes (in panorama pixels);
    /// an object is found when a kept track belongs to it; a kept track that belongs to no object is false.
    /// </summary>
    public static TrackCounts Judge(ApronDriveBy drive, IReadOnlyList<TrackReport> tracks, IReadOnlyList<long> sampled)
    {
        var inView = drive.Objects.Where(o => sampled.Count(i => drive.VisiblePixels(o.Id, i) == o.Area) >= 3).Select(o => o.Id).ToHashSet();
        var found = new HashSet<int>();
        int falseTracks = 0;
        foreach (var t in tracks.Where(t => t.Kept))
        {
            var sightings = t.Sightings ?? [];
            if (sightings.Count == 0) { falseTracks++; continue; }
            var votes = sightings
                .Select(s => drive.ObjectAt(drive.Offset(s.Index) + s.Box.X + s.Box.Width / 2, s.Box.Y + s.Box.Height / 2))
                .GroupBy(id => id).OrderByDescending(g => g.Count()).First();
            if (votes.Key != 0 && votes.Count() * 2 > sightings.Count) found.Add(votes.Key);
            else falseTracks++;
        }
        found.IntersectWith(drive.Objects.Select(o => o.Id));
        return new TrackCounts(inView.Count, found.Count(inView.Contains), inView.Count(id => !found.Contains(id)), falseTracks);
    }
}
