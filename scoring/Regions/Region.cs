namespace Strayspot.Scoring.Regions;

/// <summary>
/// One connected anomalous region (8-connectivity) of a frame's mask.
/// Ids run 1..N in raster order of each region's first pixel, counting kept regions only.
/// Box and centroid are in pixels (centroid = mean x and mean y of the region's pixels).
/// <paramref name="AreaShare"/> is the area over the frame's pixel count. <paramref name="MajorityClass"/> is
/// the predicted class under most of the region (the smaller index on a tie), with its share of the area.
/// <paramref name="OnSurface"/>: the majority class is a surface class, or a pixel of the region has an
/// 8-neighbour outside it whose class is a surface class; false when no surface classes were given.
/// </summary>
public sealed record Region(
    int Id, int Left, int Top, int Width, int Height, long Area, double AreaShare,
    double CentroidX, double CentroidY, float MaxScore, float MeanScore,
    int MajorityClass, double MajorityShare, bool OnSurface);

/// <summary>
/// Which components become regions: at least <paramref name="MinimumArea"/> pixels, and, when
/// <paramref name="SurfaceClasses"/> is given, lying on or touching one of those classes (e.g. debris on the
/// apron surface, not a bird in the sky). With <paramref name="KeepOnlyOnSurface"/> false the surface classes only
/// mark each region's <see cref="Region.OnSurface"/> and no region is dropped for it.
/// </summary>
public sealed record RegionFilter(int MinimumArea, IReadOnlyList<int>? SurfaceClasses, bool KeepOnlyOnSurface = true);
