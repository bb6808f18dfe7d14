using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Demo;

public sealed class ApronSceneTests
{
    [Fact]
    public void SameSeedGivesTheSameFrameAndAnotherSeedAnotherFrame()
    {
        var gen = new ApronSceneGenerator(256, 128);
        var a = gen.Render(11);
        var b = gen.Render(11);
        var c = gen.Render(12);
        Assert.Equal(a.Rgb, b.Rgb);
        Assert.Equal(a.Labels, b.Labels);
        Assert.NotEqual(a.Rgb, c.Rgb);
    }

    [Theory]
    [InlineData(1024, 512)]
    [InlineData(333, 217)]
    [InlineData(64, 200)]
    public void AnySizeGivesMatchingBuffersAndOnlyKnownLabels(int width, int height)
    {
        var f = new ApronSceneGenerator(width, height).Render(3);
        Assert.Equal(width * height * 3, f.Rgb.Length);
        Assert.Equal(width * height, f.Labels.Length);
        Assert.All(f.Labels.Distinct(), l => Assert.True(l < ApronClasses.Count, $"label {l}"));
    }

    [Fact]
    public void EveryClassAppearsAndSkyIsAboveThePavement()
    {
        var frames = ApronSceneSet.Normal(4, 9, 512, 256);
        var seen = new HashSet<byte>();
        foreach (var f in frames)
        {
            foreach (var l in f.Labels) seen.Add(l);
            Assert.Equal(ApronClasses.Sky, f.Labels[f.Width / 2]);
            Assert.True(ApronClasses.IsSurface(f.Labels[(f.Height - 1) * f.Width + f.Width / 2])
                        || f.Labels[(f.Height - 1) * f.Width + f.Width / 2] is ApronClasses.Vehicle or ApronClasses.Grass);
        }
        Assert.Equal(ApronClasses.Count, seen.Count);
    }

    [Fact]
    public void TooSmallFramesAreRefusedWithTheSize()
    {
        var e = Assert.Throws<ArgumentOutOfRangeException>(() => new ApronSceneGenerator(8, 300));
        Assert.Contains("8x300", e.Message);
    }

    [Fact]
    public void DebrisMaskMarksObjectsRingsThemAndLeavesTheRestNormal()
    {
        var source = new ApronSceneGenerator().Render(21);
        var d = ApronDebrisPainter.Paint(source, 5, 4);
        Assert.Equal(4, d.ObjectCount);
        int w = source.Width, h = source.Height;
        long debris = 0, onSurface = 0;
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                int i = y * w + x;
                byte m = d.AnomalyMask[i];
                Assert.True(m is 0 or 1 or 255, $"mask value {m}");
                if (m == 1)
                {
                    debris++;
                    if (ApronClasses.IsSurface(source.Labels[i])) onSurface++;
                    Assert.Equal(ApronClasses.Ignore, d.Frame.Labels[i]);
                    // Every neighbour within the ring width is debris or ignore, never normal.
                    for (int yy = Math.Max(0, y - 2); yy <= Math.Min(h - 1, y + 2); yy++)
                        for (int xx = Math.Max(0, x - 2); xx <= Math.Min(w - 1, x + 2); xx++)
                            Assert.NotEqual(ApronDebrisPainter.Normal, d.AnomalyMask[yy * w + xx]);
                }
                else if (m == 0)
                {
                    Assert.Equal(source.Rgb[3 * i], d.Frame.Rgb[3 * i]);
                    Assert.Equal(source.Labels[i], d.Frame.Labels[i]);
                }
            }
        Assert.True(debris > 200, $"{debris} debris pixels");
        Assert.True(onSurface > debris / 2, $"{onSurface} of {debris} debris pixels lie on pavement or markings");
    }

    [Fact]
    public void DebrisHuesDoNotOccurInNormalFrames()
    {
        // Saturation of the strongly coloured pixels: debris uses hues from purple through magenta and cyan, which the
        // normal scenes never contain (their saturated colours are yellows, greens and blues of the sky).
        static bool Foreign(byte r, byte g, byte b)
        {
            int max = Math.Max(r, Math.Max(g, b)), min = Math.Min(r, Math.Min(g, b));
            if (max - min < 100) return false;
            bool purple = b == max && r > g + 40;
            bool magenta = r == max && b > g + 60;
            bool cyan = g > 150 && b > 150 && r < 80;
            bool orangeRed = r == max && r > 200 && g < 110 && b < 60;
            return purple || magenta || cyan || orangeRed;
        }
        foreach (var f in ApronSceneSet.Normal(6, 4))
            for (int i = 0; i < f.Width * f.Height; i++)
                Assert.False(Foreign(f.Rgb[3 * i], f.Rgb[3 * i + 1], f.Rgb[3 * i + 2]), $"pixel {i} of a normal frame has a debris hue");
        long foreign = 0;
        foreach (var df in ApronSceneSet.Generate(3, 4))
            for (int i = 0; i < df.Frame.Width * df.Frame.Height; i++)
                if (df.AnomalyMask[i] == 1 && Foreign(df.Frame.Rgb[3 * i], df.Frame.Rgb[3 * i + 1], df.Frame.Rgb[3 * i + 2])) foreign++;
        Assert.True(foreign > 100, $"{foreign} debris pixels have a foreign hue");
    }
}
