using Strayspot.Scoring.Regions;

namespace Strayspot.Scoring.Tracks;

/// <summary>
/// Links the regions of sampled frames, given in order, into tracks. Matching is greedy and one-to-one per frame:
/// candidate pairs (open track, region) are taken by overlap, highest first, then by centroid distance, nearest first;
/// a track is compared through its latest sighting. Regions left over start new tracks. Memory holds the open tracks
/// and the sightings of every track (regions are few next to pixels), never a frame.
/// </summary>
public sealed class TrackLinker
{
    private readonly TrackLinkOptions _options;
    // Ids are given at creation: new tracks are made in sample order and, within a sample, in region-id order,
    // so creation order is the order of first sighting and a caller can key per-track state on the id at once.
    private readonly List<(int Id, List<TrackSighting> Sightings)> _open = new();
    private readonly List<(int Id, List<TrackSighting> Sightings)> _closed = new();
    private readonly List<int> _assigned = new();
    private readonly List<(int Track, int Region, double Overlap, double Distance)> _pairs = new();
    private int _lastSample = -1;
    private int _count;

    public TrackLinker(TrackLinkOptions? options = null)
    {
        _options = options ?? new TrackLinkOptions();
        _options.Validate();
    }

    /// <summary>
    /// Adds the regions of the next sampled frame. <paramref name="sample"/> must grow from call to call (a gap in it
    /// counts as missed frames). Returns the track id each region went to (index = position in
    /// <paramref name="regions"/>), valid until the next call.
    /// </summary>
    public IReadOnlyList<int> Add(int sample, long frameIndex, double timeSeconds, int frameWidth, int frameHeight, IReadOnlyList<Region> regions)
    {
        if (sample <= _lastSample)
            throw new ArgumentException($"Sampled frames must come in order: {sample} after {_lastSample}.", nameof(sample));
        _lastSample = sample;
        double reach = _options.MaximumCentroidShift * Math.Sqrt((double)frameWidth * frameWidth + (double)frameHeight * frameHeight);

        // Close tracks that have been missing for longer than the tolerance.
        for (int t = _open.Count - 1; t >= 0; t--)
        {
            if (sample - _open[t].Sightings[^1].Sample - 1 > _options.MissedFrames)
            {
                _closed.Add(_open[t]);
                _open.RemoveAt(t);
            }
        }

        _pairs.Clear();
        for (int t = 0; t < _open.Count; t++)
        {
            var last = _open[t].Sightings[^1];
            for (int r = 0; r < regions.Count; r++)
            {
                var g = regions[r];
                double overlap = Overlap(last, g);
                double distance = Math.Sqrt(Square(last.CentroidX - g.CentroidX) + Square(last.CentroidY - g.CentroidY));
                if (overlap >= _options.MinimumOverlap || distance <= reach)
                    _pairs.Add((t, r, overlap, distance));
            }
        }
        _pairs.Sort((a, b) =>
        {
            int c = b.Overlap.CompareTo(a.Overlap);
            if (c != 0) return c;
            c = a.Distance.CompareTo(b.Distance);
            if (c != 0) return c;
            c = a.Track.CompareTo(b.Track);
            return c != 0 ? c : a.Region.CompareTo(b.Region);
        });

        _assigned.Clear();
        for (int r = 0; r < regions.Count; r++) _assigned.Add(0);
        Span<bool> trackTaken = _open.Count <= 256 ? stackalloc bool[_open.Count] : new bool[_open.Count];
        Span<bool> regionTaken = regions.Count <= 256 ? stackalloc bool[regions.Count] : new bool[regions.Count];
        foreach (var p in _pairs)
        {
            if (trackTaken[p.Track] || regionTaken[p.Region]) continue;
            trackTaken[p.Track] = true;
            regionTaken[p.Region] = true;
            _open[p.Track].Sightings.Add(Sighting(sample, frameIndex, timeSeconds, regions[p.Region]));
            _assigned[p.Region] = _open[p.Track].Id;
        }
        for (int r = 0; r < regions.Count; r++)
        {
            if (regionTaken[r]) continue;
            _open.Add((++_count, [Sighting(sample, frameIndex, timeSeconds, regions[r])]));
            _assigned[r] = _count;
        }
        return _assigned;
    }

    /// <summary>
    /// Hands over the tracks closed since the last call (no later sighting can join them) and forgets them, so a
    /// long recording's finished tracks can be written out instead of held; <see cref="Tracks"/> then lists only the
    /// tracks not yet taken. With <paramref name="all"/>, the open tracks too (the recording has ended).
    /// </summary>
    public IReadOnlyList<Track> TakeClosed(bool all = false)
    {
        if (all)
        {
            _closed.AddRange(_open);
            _open.Clear();
        }
        _closed.Sort((a, b) => a.Id.CompareTo(b.Id));
        var tracks = new List<Track>(_closed.Count);
        foreach (var (id, sightings) in _closed) tracks.Add(Summarize(id, sightings));
        _closed.Clear();
        return tracks;
    }

    /// <summary>Every track not yet taken, open or closed, numbered 1..N in order of first sighting (then of region id).</summary>
    public IReadOnlyList<Track> Tracks()
    {
        var all = new List<(int Id, List<TrackSighting> Sightings)>(_closed.Count + _open.Count);
        all.AddRange(_closed);
        all.AddRange(_open);
        all.Sort((a, b) => a.Id.CompareTo(b.Id));
        var tracks = new List<Track>(all.Count);
        foreach (var (id, sightings) in all) tracks.Add(Summarize(id, sightings));
        return tracks;
    }

    private static Track Summarize(int id, List<TrackSighting> sightings)
    {
        float max = float.NegativeInfinity;
        double weighted = 0;
        long area = 0;
        TrackSighting best = sightings[0];
        var areaByClass = new SortedDictionary<int, long>();
        foreach (var s in sightings)
        {
            if (s.MaxScore > max) { max = s.MaxScore; best = s; }
            weighted += (double)s.MeanScore * s.Area;
            area += s.Area;
            areaByClass[s.MajorityClass] = areaByClass.GetValueOrDefault(s.MajorityClass) + s.Area;
        }
        int beneath = -1;
        long most = -1;
        foreach (var (c, a) in areaByClass)
            if (a > most) { most = a; beneath = c; }
        return new Track(id, sightings.ToArray(), max, area > 0 ? (float)(weighted / area) : 0f, beneath, best);
    }

    private static TrackSighting Sighting(int sample, long frameIndex, double time, Region g) =>
        new(sample, frameIndex, time, g.Id, g.Left, g.Top, g.Width, g.Height, g.Area, g.CentroidX, g.CentroidY,
            g.MaxScore, g.MeanScore, g.MajorityClass);

    /// <summary>Intersection over union of the two boxes.</summary>
    private static double Overlap(TrackSighting a, Region b)
    {
        long ix = Math.Max(0, Math.Min(a.Left + a.Width, b.Left + b.Width) - Math.Max(a.Left, b.Left));
        long iy = Math.Max(0, Math.Min(a.Top + a.Height, b.Top + b.Height) - Math.Max(a.Top, b.Top));
        long inter = ix * iy;
        long union = (long)a.Width * a.Height + (long)b.Width * b.Height - inter;
        return union > 0 ? (double)inter / union : 0;
    }

    private static double Square(double v) => v * v;
}
