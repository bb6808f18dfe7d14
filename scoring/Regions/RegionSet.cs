namespace Strayspot.Scoring.Regions;

/// <summary>
/// The regions kept from one frame's mask, the component counts behind them, and the label map.
/// The label map lives in the <see cref="RegionFinder"/>'s reused buffer: it is valid until that finder's
/// next <see cref="RegionFinder.Find"/>, and asking for it afterwards throws rather than returning another frame's labels.
/// </summary>
public sealed class RegionSet
{
    private readonly RegionFinder _finder;
    private readonly long _generation;

    internal RegionSet(RegionFinder finder, long generation, int width, int height, IReadOnlyList<Region> regions,
        int componentsFound, int droppedByArea, int droppedBySurface)
    {
        _finder = finder;
        _generation = generation;
        Width = width;
        Height = height;
        Regions = regions;
        ComponentsFound = componentsFound;
        DroppedByArea = droppedByArea;
        DroppedBySurface = droppedBySurface;
    }

    public int Width { get; }
    public int Height { get; }

    /// <summary>Kept regions; <c>Regions[i].Id == i + 1</c>.</summary>
    public IReadOnlyList<Region> Regions { get; }

    /// <summary>8-connected components of the mask before any filtering.</summary>
    public int ComponentsFound { get; }

    /// <summary>Components dropped for having fewer pixels than the minimum area.</summary>
    public int DroppedByArea { get; }

    /// <summary>Components of enough area dropped for neither lying on nor touching a surface class.</summary>
    public int DroppedBySurface { get; }

    /// <summary>
    /// Region id per pixel, row-major: 0 for background and for dropped components. Filled on first use
    /// (a frame whose labels are never looked at does not pay for them).
    /// </summary>
    public ReadOnlySpan<int> Labels => _finder.LabelsFor(_generation);
}
