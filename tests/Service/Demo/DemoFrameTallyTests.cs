using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Demo;

public sealed class DemoFrameTallyTests
{
    // 8x4 frame, worked by hand: debris pieces A (two pixels touching diagonally, one piece under 8-connectivity) and B;
    // region 1 covers one pixel of A, region 2 lies on ignore and normal pixels only, region 3 covers nothing of B.
    private static readonly byte[] Mask =
    [
        1, 0, 0, 0, 0, 0, 255, 1,
        0, 1, 0, 0, 0, 0, 255, 1,
        0, 0, 0, 0, 0, 0, 255, 255,
        0, 0, 0, 0, 0, 0, 0, 0,
    ];

    private static readonly int[] Regions =
    [
        0, 0, 0, 0, 0, 0, 2, 0,
        0, 1, 1, 0, 0, 0, 2, 0,
        0, 0, 0, 0, 0, 0, 0, 0,
        3, 3, 0, 0, 0, 0, 0, 0,
    ];

    [Fact]
    public void CountsRegionsOnDebrisFalseRegionsAndFoundPieces()
    {
        var t = DemoFrameTally.Count(Regions, 3, Mask, 8, 4);
        Assert.Equal(new DemoFrameTally(Regions: 3, OnDebris: 1, False: 2, Pieces: 2, PiecesFound: 1), t);
    }

    [Fact]
    public void EveryRegionOfAFrameWithoutDebrisIsFalse()
    {
        Assert.Equal(new DemoFrameTally(3, 0, 3, 0, 0), DemoFrameTally.Count(Regions, 3, null, 8, 4));
    }

    [Fact]
    public void RefusesAMaskOfAnotherSize()
    {
        Assert.Throws<ArgumentException>(() => DemoFrameTally.Count(Regions, 3, new byte[8], 8, 4));
    }
}
