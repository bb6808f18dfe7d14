namespace Strayspot.Scoring.Reduction;

/// <summary>
/// Work that reads a stretch of the reduced maps as soon as the reduction has written it, while it is still in
/// cache, instead of walking the frame-sized maps again afterwards. Called from the reduction's parallel bands with
/// disjoint stretches, so an implementation must only touch its own stretch.
/// </summary>
public interface IReducedPixelsHandler
{
    /// <summary>Pixels [<paramref name="start"/>, start + <paramref name="length"/>) of the maps are final.</summary>
    void Take(ReducedMaps maps, int start, int length);
}
