using System.Text;
using Microsoft.AspNetCore.Http;
using Strayspot.Scoring;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Api;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;
using Strayspot.Service.Profiles;

namespace Strayspot.Fuzz;

/// <summary>
/// The readers that take bytes from outside, each as a fuzz target: given any input, a target returns or throws one of
/// our coded refusals (<see cref="CodedException"/>); anything else is a crash. Shared by the test that runs each target
/// over its seed corpus plus mutations, and by the SharpFuzz console that afl++ drives for longer runs.
/// </summary>
public static class FuzzTargets
{
    public static readonly IReadOnlyDictionary<string, Action<byte[]>> All = new Dictionary<string, Action<byte[]>>
    {
        ["npy"] = Npy,
        ["descriptor"] = Descriptor,
        ["statistics"] = Statistics,
        ["profile"] = Profile,
        ["batch-json"] = BatchJson,
        ["multipart"] = Multipart,
        ["image-header"] = ImageHeader,
    };

    /// <summary>Runs a target; true when it accepted or refused with a code, false never (anything else propagates).</summary>
    public static void Run(string target, byte[] input)
    {
        try { All[target](input); }
        catch (CodedException) { }
    }

    private static void Npy(byte[] input)
    {
        using var stream = new MemoryStream(input, writable: false);
        var npy = Scoring.Logits.Npy.ReadFloat32(stream);
        var shape = Array.ConvertAll(npy.Shape, d => (long)d);
        LogitsView.FromShape(npy.Data, shape);
    }

    private static void Descriptor(byte[] input) => ModelDescriptor.Parse(Encoding.UTF8.GetString(input));

    private static void Statistics(byte[] input) => ClassStatistics.Read(new MemoryStream(input, writable: false));

    private static void Profile(byte[] input)
    {
        ScoringProfile.Read(new MemoryStream(input, writable: false));
        ScoringProfile.ReadReplacement(input, "fuzz");
    }

    /// <summary>The batch submission body: JSON errors are the documented refusal (400 bad-request), so they count as coded.</summary>
    private static void BatchJson(byte[] input)
    {
        try
        {
            System.Text.Json.JsonSerializer.Deserialize<BatchRequest>(input, new System.Text.Json.JsonSerializerOptions(System.Text.Json.JsonSerializerDefaults.Web));
        }
        catch (System.Text.Json.JsonException e)
        {
            throw new FuzzRefusal("bad-request", e.Message);
        }
    }

    /// <summary>A multipart body through the same reader and checks as every upload endpoint; it must answer, never throw.</summary>
    private static void Multipart(byte[] input)
    {
        var http = new DefaultHttpContext();
        http.Request.ContentType = "multipart/form-data; boundary=fuzz-boundary";
        http.Request.Body = new MemoryStream(input, writable: false);
        http.Request.ContentLength = input.Length;
        http.Features.Set<Microsoft.AspNetCore.Http.Features.IFormFeature>(new Microsoft.AspNetCore.Http.Features.FormFeature(http.Request,
            new Microsoft.AspNetCore.Http.Features.FormOptions { ValueCountLimit = 64, MultipartBodyLengthLimit = 1 << 20 }));
        var (form, problem) = UploadForm.ReadAsync(http.Request, "logits", "float32 NPY logits", ScoringForm.FieldsFor("logits"), CancellationToken.None)
            .GetAwaiter().GetResult();
        if ((form is null) == (problem is null)) throw new InvalidOperationException("the form reader gave neither a form nor a problem");
        if (form is not null)
            ScoringForm.Parse(form, new Scoring.Pipeline.ScoringOptions(), 4096L * 4096);
    }

    private static readonly FrameDecoder Decoder = new(new FrameDecoderOptions { MaxPixels = 1 << 20 });

    private static void ImageHeader(byte[] input)
    {
        using var frame = Decoder.Decode(input);
    }
}

/// <summary>A refusal a target makes from a documented non-coded one (a JSON error the API answers as 400).</summary>
public sealed class FuzzRefusal(string code, string message) : CodedException(code, message);
