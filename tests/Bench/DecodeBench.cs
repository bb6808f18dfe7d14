using System.Diagnostics;
using SixLabors.ImageSharp;
using SixLabors.ImageSharp.Advanced;
using SixLabors.ImageSharp.Formats.Png;
using SixLabors.ImageSharp.PixelFormats;
using SixLabors.ImageSharp.Processing;
using Strayspot.Service.Demo;
using Strayspot.Service.Frames;

namespace Strayspot.Bench;

/// <summary>
/// <c>decode</c>: one 1024×512 demo PNG decoded to RGB the way the service did first (ImageSharp 2.1, then
/// auto-orient) and the way it does now (<see cref="FrameDecoder"/>: the managed path for 8-bit RGB, RGBA and grey,
/// libpng through SkiaSharp for other 8-bit PNGs), alternating run by run so both see the same machine load.
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
        var (b, n) = Alternate(runs, Before, Now);
        Console.WriteLine();
        Console.WriteLine($"| decode, 1024×512 PNG ({png.Length / 1e3:0} KB) to RGB | median ms |");
        Console.WriteLine("|---|---|");
        Console.WriteLine($"| ImageSharp 2.1 + auto-orient (before) | {b:0.0} |");
        Console.WriteLine($"| FrameDecoder: managed path, else libpng, for 8-bit PNG (now) | {n:0.0} |");
        Console.WriteLine($"| ratio | {b / n:0.0}× |");
        Console.WriteLine($"| of which: ImageSharp's header read (identify) | {identify:0.0} |");
        Console.WriteLine($"| for scale: libpng decode and RGBA → RGB copy (the path before the managed one) | {skia:0.0} |");
        PngDecoders(runs, png, "1024×512 demo frame");
        PngDecoders(runs, DemoPng.Encode(new ApronSceneGenerator(1920, 1080).Render(70)), "1920×1080 demo scene");
        FilterMethods(runs, png);
        PixelLoops(runs, png);
    }

    /// <summary>
    /// The demo frame's pixels written again by ImageSharp with each filter method on every row, decoded by libpng
    /// and by the managed path alternating: what each row filter costs each of them.
    /// </summary>
    public static void FilterMethods(int runs, byte[] png)
    {
        using var pixels = Image.Load<Rgb24>(png);
        Console.WriteLine();
        Console.WriteLine("| 1024×512 demo frame, every row one filter | libpng, median ms | managed, median ms | managed / libpng | ImageSharp's pixels |");
        Console.WriteLine("|---|---|---|---|---|");
        foreach (var filter in new[] { PngFilterMethod.None, PngFilterMethod.Sub, PngFilterMethod.Up, PngFilterMethod.Average, PngFilterMethod.Paeth })
        {
            using var stream = new MemoryStream();
            pixels.SaveAsPng(stream, new PngEncoder { FilterMethod = filter, ColorType = PngColorType.Rgb, BitDepth = PngBitDepth.Bit8 });
            byte[] file = stream.ToArray();
            Image<Rgb24> Libpng() => PngFastDecoder.TryDecode(file, Configuration.Default) ?? throw new InvalidOperationException("libpng declined");
            Image<Rgb24> Managed() => PngFrameInflater.TryDecode(file, Configuration.Default) ?? throw new InvalidOperationException("managed path declined");
            var (libpng, managed) = Alternate(runs, () => Libpng().Dispose(), () => Managed().Dispose());
            using var viaManaged = Managed();
            bool same = true;
            for (int y = 0; y < pixels.Height && same; y++)
                same = pixels.DangerousGetPixelRowMemory(y).Span.SequenceEqual(viaManaged.DangerousGetPixelRowMemory(y).Span);
            Console.WriteLine($"| {filter} | {libpng:0.00} | {managed:0.00} | {managed / libpng:0.00}× | {(same ? "yes" : "NO")} |");
        }
    }

    /// <summary>
    /// The two loops around the network that touch every pixel, each beside its previous scalar form (copied here),
    /// alternating run by run on the same data: RGBA → RGB after libpng, and RGB bytes → the model's normalized
    /// planes for a frame already at the network's size. Both must give the same bytes and floats.
    /// </summary>
    public static void PixelLoops(int runs, byte[]? png = null)
    {
        png ??= DemoPng.Encode(new ApronSceneGenerator(1024, 512).Render(70));
        int w = 1024, h = 512;
        using var frame = new FrameDecoder().Decode(png);
        var rgba = new byte[w * h * 4];
        for (int y = 0; y < h; y++)
        {
            var row = System.Runtime.InteropServices.MemoryMarshal.AsBytes(frame.Image.DangerousGetPixelRowMemory(y).Span);
            for (int x = 0; x < w; x++) { rgba[4 * x + y * w * 4] = row[3 * x]; rgba[4 * x + 1 + y * w * 4] = row[3 * x + 1]; rgba[4 * x + 2 + y * w * 4] = row[3 * x + 2]; rgba[4 * x + 3 + y * w * 4] = 255; }
        }
        var rgbOld = new byte[w * h * 3];
        var rgbNew = new byte[w * h * 3];
        void DropOld()
        {
            for (int y = 0; y < h; y++)
            {
                var from = rgba.AsSpan(y * w * 4, w * 4);
                var row = rgbOld.AsSpan(y * w * 3, w * 3);
                for (int x = 0, o = 0; x < from.Length; x += 4, o += 3) { row[o] = from[x]; row[o + 1] = from[x + 1]; row[o + 2] = from[x + 2]; }
            }
        }
        void DropNew()
        {
            for (int y = 0; y < h; y++) PngFastDecoder.DropAlpha(rgba.AsSpan(y * w * 4, w * 4), rgbNew.AsSpan(y * w * 3, w * 3));
        }

        var descriptor = DemoDescriptor();
        var input = descriptor.Input;
        var pre = new FramePreprocessor(input);
        var planesOld = new float[3 * w * h];
        float[] scale = new float[3], offset = new float[3];
        for (int c = 0; c < 3; c++) { scale[c] = 1f / (input.ValueScale * input.Std[c]); offset[c] = -input.Mean[c] / input.Std[c]; }
        bool bgr = input.ChannelOrder == "bgr";
        void PrepareOld()
        {
            int bands = Math.Min(Environment.ProcessorCount * 2, h);
            Parallel.For(0, bands, band =>
            {
                int y0 = h * band / bands, y1 = h * (band + 1) / bands;
                for (int y = y0; y < y1; y++)
                {
                    var pixels = frame.Image.DangerousGetPixelRowMemory(y).Span;
                    var r = planesOld.AsSpan(y * w, w);
                    var g = planesOld.AsSpan(w * h + y * w, w);
                    var b = planesOld.AsSpan(2 * w * h + y * w, w);
                    for (int x = 0; x < w; x++)
                    {
                        var p = pixels[x];
                        float first = bgr ? p.B : p.R, third = bgr ? p.R : p.B;
                        r[x] = first * scale[0] + offset[0];
                        g[x] = (float)p.G * scale[1] + offset[1];
                        b[x] = third * scale[2] + offset[2];
                    }
                }
            });
        }
        float[] planesNew = [];
        void PrepareNew() => planesNew = pre.Prepare(frame).Data.ToArray();
        var (dropOld, dropNew) = Alternate(runs, DropOld, DropNew);
        var (prepOld, prepNew) = Alternate(runs, PrepareOld, () => pre.Prepare(frame));
        PrepareNew();
        bool sameBytes = rgbOld.AsSpan().SequenceEqual(rgbNew);
        bool sameFloats = System.Runtime.InteropServices.MemoryMarshal.AsBytes(planesOld.AsSpan()).SequenceEqual(System.Runtime.InteropServices.MemoryMarshal.AsBytes(planesNew.AsSpan()));
        Console.WriteLine();
        Console.WriteLine("| per-pixel loop, 1024×512 | before (scalar) | now (16 pixels a pass) | ratio | same output |");
        Console.WriteLine("|---|---|---|---|---|");
        Console.WriteLine($"| RGBA → RGB after libpng (one thread) | {dropOld:0.00} ms | {dropNew:0.00} ms | {dropOld / dropNew:0.0}× | {(sameBytes ? "yes, byte for byte" : "NO")} |");
        Console.WriteLine($"| RGB → normalized planes at the network's size (preprocess, {Math.Min(Environment.ProcessorCount * 2, h)} bands) | {prepOld:0.00} ms | {prepNew:0.00} ms | {prepOld / prepNew:0.0}× | {(sameFloats ? "yes, bit for bit" : "NO")} |");
    }

    private static Strayspot.Service.Models.ModelDescriptor DemoDescriptor()
    {
        string root = Directory.CreateTempSubdirectory("strayspot-bench-decode-").FullName;
        try
        {
            string folder = BundledDemo.Extract(Path.Combine(root, "demo"), Path.Combine(root, "frames")).Item1;
            return Strayspot.Service.Models.ModelDescriptor.Load(Path.Combine(folder, Strayspot.Service.Models.ModelDescriptor.FileName));
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }

    /// <summary>
    /// The three PNG decoders one after another in each run (ImageSharp 2.1, libpng through SkiaSharp, the managed
    /// inflate-and-unfilter path), each to Rgb24, and whether the two fast ones give ImageSharp's pixels.
    /// </summary>
    public static void PngDecoders(int runs, byte[] png, string what)
    {
        var configuration = Configuration.Default;
        Image<Rgb24> Sharp() => Image.Load<Rgb24>(png);
        Image<Rgb24> Libpng() => PngFastDecoder.TryDecode(png, configuration) ?? throw new InvalidOperationException("libpng declined");
        Image<Rgb24> Managed() => PngFrameInflater.TryDecode(png, configuration) ?? throw new InvalidOperationException("managed path declined");
        Func<Image<Rgb24>>[] decoders = [Sharp, Libpng, Managed];
        var times = decoders.Select(_ => new List<double>()).ToArray();
        for (int i = -3; i < Math.Max(runs, 15); i++)
            for (int d = 0; d < decoders.Length; d++)
            {
                long t = Stopwatch.GetTimestamp();
                decoders[d]().Dispose();
                if (i >= 0) times[d].Add(Stopwatch.GetElapsedTime(t).TotalMilliseconds);
            }
        using var reference = Sharp();
        using var viaLibpng = Libpng();
        using var viaManaged = Managed();
        bool Same(Image<Rgb24> other)
        {
            for (int y = 0; y < reference.Height; y++)
                if (!reference.DangerousGetPixelRowMemory(y).Span.SequenceEqual(other.DangerousGetPixelRowMemory(y).Span)) return false;
            return true;
        }
        double sharp = Measure.Median(times[0]), libpng = Measure.Median(times[1]), managed = Measure.Median(times[2]);
        Console.WriteLine();
        Console.WriteLine($"| PNG decode to Rgb24, {what} ({reference.Width}×{reference.Height}, {png.Length / 1e3:0} KB), alternating | median ms | vs libpng | ImageSharp's pixels |");
        Console.WriteLine("|---|---|---|---|");
        Console.WriteLine($"| ImageSharp 2.1 | {sharp:0.00} | {sharp / libpng:0.00}× | (reference) |");
        Console.WriteLine($"| libpng via SkiaSharp (before) | {libpng:0.00} | 1.00× | {(Same(viaLibpng) ? "yes" : "NO")} |");
        Console.WriteLine($"| managed: ZLibStream + unfilter (now) | {managed:0.00} | {managed / libpng:0.00}× | {(Same(viaManaged) ? "yes" : "NO")} |");
    }

    private static (double Before, double Now) Alternate(int runs, Action before, Action now)
    {
        for (int i = 0; i < 3; i++) { before(); now(); }
        var b = new List<double>();
        var n = new List<double>();
        for (int i = 0; i < Math.Max(runs, 15); i++)
        {
            long t = Stopwatch.GetTimestamp();
            before();
            b.Add(Stopwatch.GetElapsedTime(t).TotalMilliseconds);
            t = Stopwatch.GetTimestamp();
            now();
            n.Add(Stopwatch.GetElapsedTime(t).TotalMilliseconds);
        }
        return (Measure.Median(b), Measure.Median(n));
    }
}
