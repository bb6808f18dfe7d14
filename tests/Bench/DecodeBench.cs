using System.Diagnostics;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.PixelFormats;
using SixLabors.ImageSharp.Processing;
using Strayspot.Service.Demo;
using Strayspot.Service.Frames;

namespace Strayspot.Bench;

/// <summary>
/// <c>decode</c>: one 1024×512 demo PNG decoded to RGB the way the service did before (ImageSharp 2.1, then
/// auto-orient) and the way it does now (<see cref="FrameDecoder"/>: libpng through SkiaSharp for 8-bit PNG),
/// alternating run by run so both see the same machine load.
/// </summary>
public static class DecodeBench
{
    public static void Run(int runs)
    {
        byte[] png = DemoPng.Encode(new ApronSceneGenerator(1024, 512).Render(70));
        var decoder = new FrameDecoder();
        void Before() { using var i = Image.Load<Rgb24>(png); i.Mutate(x => x.AutoOrient()); }
        void Now() { using var f = decoder.Decode(png); }
        double identify = Measure.MedianMs(runs, () => Image.Identify(png));
        double skia = Measure.MedianMs(runs, () => { using var i = PngFastDecoder.TryDecode(png, Configuration.Default); });
        for (int i = 0; i < 3; i++) { Before(); Now(); }
        var before = new List<double>();
        var now = new List<double>();
        for (int i = 0; i < Math.Max(runs, 15); i++)
        {
            long t = Stopwatch.GetTimestamp();
            Before();
            before.Add(Stopwatch.GetElapsedTime(t).TotalMilliseconds);
            t = Stopwatch.GetTimestamp();
            Now();
            now.Add(Stopwatch.GetElapsedTime(t).TotalMilliseconds);
        }
        double b = Measure.Median(before), n = Measure.Median(now);
        Console.WriteLine();
        Console.WriteLine($"| decode, 1024×512 PNG ({png.Length / 1e3:0} KB) to RGB | median ms |");
        Console.WriteLine("|---|---|");
        Console.WriteLine($"| ImageSharp 2.1 + auto-orient (before) | {b:0.0} |");
        Console.WriteLine($"| FrameDecoder: libpng via SkiaSharp for 8-bit PNG (now) | {n:0.0} |");
        Console.WriteLine($"| ratio | {b / n:0.0}× |");
        Console.WriteLine($"| of which: ImageSharp's header read (identify) | {identify:0.0} |");
        Console.WriteLine($"| of which: libpng decode and RGBA → RGB copy | {skia:0.0} |");
    }
}
