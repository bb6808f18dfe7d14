using System.Diagnostics;
using Microsoft.AspNetCore.Http;
using Microsoft.AspNetCore.Http.Features;
using Strayspot.Service.Demo;

namespace Strayspot.Bench;

/// <summary>
/// <c>form</c>: reading one multipart upload of a 1024×512 demo PNG and copying its file part out, as the frames
/// endpoint does, with ASP.NET Core's default 64 KB memory threshold (the part spills to a temporary file) and the
/// service's 4 MB one; alternating run by run.
/// </summary>
public static class FormBench
{
    public static void Run(int runs)
    {
        byte[] png = DemoPng.Encode(new ApronSceneGenerator(1024, 512).Render(70));
        using var content = new MultipartFormDataContent("strayspot-bench-boundary");
        content.Add(new ByteArrayContent(png), "frame", "frame.png");
        byte[] body = content.ReadAsByteArrayAsync().Result;
        string type = content.Headers.ContentType!.ToString();
        double Once(int threshold)
        {
            long t = Stopwatch.GetTimestamp();
            var context = new DefaultHttpContext();
            context.Request.ContentType = type;
            context.Request.Body = new MemoryStream(body);
            context.Features.Set<IFormFeature>(new FormFeature(context.Request, new FormOptions { MemoryBufferThreshold = threshold }));
            var form = context.Request.ReadFormAsync().Result;
            var file = form.Files.GetFile("frame")!;
            var copy = new byte[file.Length];
            using (var s = file.OpenReadStream()) s.ReadExactly(copy);
            context.Response.RegisterForDispose(form as IDisposable ?? new MemoryStream());
            foreach (var f in form.Files) (f as IDisposable)?.Dispose();
            double ms = Stopwatch.GetElapsedTime(t).TotalMilliseconds;
            context.Response.HttpContext.Abort();
            return ms;
        }
        for (int i = 0; i < 3; i++) { Once(64 * 1024); Once(4 * 1024 * 1024); }
        var small = new List<double>();
        var large = new List<double>();
        for (int i = 0; i < Math.Max(runs, 15); i++) { small.Add(Once(64 * 1024)); large.Add(Once(4 * 1024 * 1024)); }
        Console.WriteLine();
        Console.WriteLine($"| read a multipart upload of a 1024×512 PNG ({png.Length / 1e3:0} KB) and copy its file part | median ms |");
        Console.WriteLine("|---|---|");
        Console.WriteLine($"| memory threshold 64 KB (ASP.NET Core's default: the part goes to a temporary file) | {Measure.Median(small):0.00} |");
        Console.WriteLine($"| memory threshold 4 MB (the service's) | {Measure.Median(large):0.00} |");
    }
}
