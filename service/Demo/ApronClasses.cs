namespace Strayspot.Service.Demo;

/// <summary>The demo's six in-distribution classes, in logit-channel order, with our own display colours.</summary>
public static class ApronClasses
{
    public const int Pavement = 0;
    public const int Marking = 1;
    public const int Grass = 2;
    public const int Sky = 3;
    public const int Building = 4;
    public const int Vehicle = 5;
    public const int Count = 6;

    /// <summary>Label value for pixels that belong to no class (debris in a label map).</summary>
    public const byte Ignore = 255;

    public static readonly string[] Names = ["pavement", "marking", "grass", "sky", "building", "vehicle"];

    /// <summary>Display colours picked for contrast on an overlay: warm sand, signal lime, moss, pale steel, plum-brown, teal.</summary>
    public static readonly string[] Colors = ["#9c8f7a", "#d7f24a", "#4f7a3a", "#a9c4de", "#7a4f5e", "#2f8f8a"];

    /// <summary>Classes a vehicle drives on: the region-of-interest filter.</summary>
    public static bool IsSurface(int cls) => cls == Pavement || cls == Marking;
}
