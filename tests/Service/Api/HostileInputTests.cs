using SixLabors.ImageSharp;
using System.IO.Compression;
using System.Net.Http.Headers;
using System.Text;
using Strayspot.Scoring.Logits;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Api;

/// <summary>One service for the whole table: every case is a refusal, so none changes what the next one sees.</summary>
public sealed class HostileService : IAsyncLifetime
{
    public TestService Service { get; private set; } = null!;

    public async Task InitializeAsync()
    {
        Service = await TestService.StartAsync(m =>
        {
            TestService.WriteModel(m, "apron-a");
            new TestSegmentationGraph { Classes = 3, Stride = 2 }.WriteFolder(Path.Combine(m, "tiny"));
        }, new Dictionary<string, string?> { ["Service:MaxRequestBytes"] = (1024 * 1024).ToString() });
        var until = DateTime.UtcNow.AddSeconds(30);
        while ((await Service.Client.GetAsync("/readyz")).StatusCode != System.Net.HttpStatusCode.OK && DateTime.UtcNow < until)
            await Task.Delay(50);
        Directory.CreateDirectory(Path.Combine(Service.DataRoot, "empty"));
    }

    public async Task DisposeAsync() => await Service.DisposeAsync();
}

/// <summary>
/// Hostile input on every route that takes input: each case names its request, the status and the problem code the
/// service must answer with. Nothing may answer 5xx, and every refusal is problem+json.
/// </summary>
public class HostileInputTests(HostileService fixture) : IClassFixture<HostileService>
{
    public sealed record Case(string Input, Func<HttpRequestMessage> Request, int Status, string Code);

    private const string Logits = "/v1/models/apron-a/logits";
    private const string Frames = "/v1/models/tiny/frames";
    private const string Batches = "/v1/batches";
    private const string Calibrations = "/v1/models/apron-a/calibrations";
    private const string Evaluations = "/v1/models/apron-a/evaluations";
    private const string Profile = "/v1/models/apron-a/profile";

    // ---- bodies ----

    private static byte[] Npy(float[] data, int[] shape)
    {
        using var ms = new MemoryStream();
        global::Strayspot.Scoring.Logits.Npy.WriteFloat32(ms, data, shape);
        return ms.ToArray();
    }

    private static byte[] GoodNpy => Npy(new float[4 * 8 * 8], [4, 8, 8]);

    private static byte[] NpyHeader(string header)
    {
        var h = Encoding.ASCII.GetBytes(header);
        int total = 10 + h.Length + 1;
        int pad = (64 - total % 64) % 64;
        var bytes = new List<byte> { 0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 1, 0 };
        ushort len = (ushort)(h.Length + pad + 1);
        bytes.Add((byte)(len & 0xff));
        bytes.Add((byte)(len >> 8));
        bytes.AddRange(h);
        bytes.AddRange(Enumerable.Repeat((byte)' ', pad));
        bytes.Add((byte)'\n');
        bytes.AddRange(new byte[16]);
        return bytes.ToArray();
    }

    private static byte[] Png => TestImages.Png(TestImages.Gradient(20, 12));

    /// <summary>A PNG whose header claims 100000×100000 pixels.</summary>
    private static byte[] HugePng()
    {
        var png = Png;
        // IHDR width and height are big-endian at bytes 16..23, its CRC at 29..32.
        byte[] big = [0x00, 0x01, 0x86, 0xA0];
        big.CopyTo(png, 16);
        big.CopyTo(png, 20);
        uint crc = System.IO.Hashing.Crc32.HashToUInt32(png.AsSpan(12, 17)); // chunk type + data (PNG spec 5.3)
        System.Buffers.Binary.BinaryPrimitives.WriteUInt32BigEndian(png.AsSpan(29), crc);
        return png;
    }

    private static byte[] HalfWebp()
    {
        using var img = TestImages.Noise(40, 24, seed: 5);
        using var ms = new MemoryStream();
        img.Save(ms, new SixLabors.ImageSharp.Formats.Webp.WebpEncoder());
        return ms.ToArray()[..(int)(ms.Length / 2)];
    }

    private static MultipartFormDataContent Form(params (string Name, object Value)[] parts)
    {
        var form = new MultipartFormDataContent("hostile-boundary");
        foreach (var (name, value) in parts)
        {
            if (value is byte[] bytes)
            {
                var part = new ByteArrayContent(bytes);
                part.Headers.ContentType = new MediaTypeHeaderValue("application/octet-stream");
                form.Add(part, name, name + ".bin");
            }
            else form.Add(new StringContent((string)value), name);
        }
        return form;
    }

    /// <summary>A multipart body cut before its closing boundary, as an upload that died half-way.</summary>
    private static HttpContent Truncated(params (string Name, object Value)[] parts)
    {
        byte[] whole = Form(parts).ReadAsByteArrayAsync().Result;
        var content = new ByteArrayContent(whole, 0, whole.Length * 2 / 3);
        content.Headers.ContentType = MediaTypeHeaderValue.Parse("multipart/form-data; boundary=hostile-boundary");
        return content;
    }

    private static StringContent Json(string body) => new(body, Encoding.UTF8, "application/json");

    private static HttpRequestMessage Post(string path, HttpContent content) => new(HttpMethod.Post, path) { Content = content };
    private static HttpRequestMessage Put(string path, HttpContent content) => new(HttpMethod.Put, path) { Content = content };
    private static HttpRequestMessage Get(string path) => new(HttpMethod.Get, path);

    public static byte[] Zip(params (string Name, byte[] Data)[] entries)
    {
        using var ms = new MemoryStream();
        using (var zip = new ZipArchive(ms, ZipArchiveMode.Create, leaveOpen: true))
            foreach (var (name, data) in entries)
            {
                using var s = zip.CreateEntry(name).Open();
                s.Write(data);
            }
        return ms.ToArray();
    }

    /// <summary>
    /// A one-entry zip whose headers (local and central) are patched: <paramref name="size"/> replaces the declared
    /// uncompressed size, <paramref name="crc"/> the CRC-32. Offsets from the zip format (PKWARE APPNOTE 4.3.7, 4.3.12).
    /// </summary>
    public static byte[] PatchedZip(byte[] data, uint? size = null, uint? crc = null)
    {
        byte[] zip = Zip(("frames/cam_00.png", data));
        int central = IndexOf(zip, [0x50, 0x4b, 0x01, 0x02]);
        if (size is uint s)
        {
            BitConverter.GetBytes(s).CopyTo(zip, 22);
            BitConverter.GetBytes(s).CopyTo(zip, central + 24);
        }
        if (crc is uint c)
        {
            BitConverter.GetBytes(c).CopyTo(zip, 14);
            BitConverter.GetBytes(c).CopyTo(zip, central + 16);
        }
        return zip;
    }

    private static int IndexOf(byte[] hay, byte[] needle)
    {
        for (int i = 0; i + needle.Length <= hay.Length; i++)
            if (hay.AsSpan(i, needle.Length).SequenceEqual(needle)) return i;
        throw new InvalidOperationException("signature not found");
    }

    private const string FullOptions = """
        "options": { "method": "sml", "energyTemperature": 1, "threshold": 2,  "minimumRegionArea": 64,
          "boundarySuppression": { "enabled": true, "initialWidth": 4, "widthStep": 1, "iterations": 4 },
          "smoothing": { "enabled": true, "kernelSize": 7, "sigma": 1, "dilation": 6 } }
        """;

    // ---- the table ----

    public static readonly IReadOnlyDictionary<string, Case> Cases = new Dictionary<string, Case>
    {
        // Logits upload.
        ["logits: truncated multipart body"] = new("2/3 of a valid body", () => Post(Logits, Truncated(("logits", GoodNpy), ("threshold", "1"))), 400, "form-invalid"),
        ["logits: two logits parts"] = new("file part 'logits' twice", () => Post(Logits, Form(("logits", GoodNpy), ("logits", GoodNpy))), 400, "validation-failed"),
        ["logits: repeated field"] = new("threshold twice", () => Post(Logits, Form(("logits", GoodNpy), ("threshold", "1"), ("threshold", "9"))), 400, "validation-failed"),
        ["logits: unknown field"] = new("field 'treshold'", () => Post(Logits, Form(("logits", GoodNpy), ("treshold", "1"))), 400, "validation-failed"),
        ["logits: unknown file part"] = new("file part 'extra'", () => Post(Logits, Form(("logits", GoodNpy), ("extra", GoodNpy))), 400, "validation-failed"),
        ["logits: no file part"] = new("fields only", () => Post(Logits, Form(("threshold", "1"))), 400, "validation-failed"),
        ["logits: no boundary"] = new("multipart/form-data without boundary", () => Post(Logits, new ByteArrayContent(GoodNpy) { Headers = { ContentType = MediaTypeHeaderValue.Parse("multipart/form-data") } }), 400, "form-invalid"),
        ["logits: json body"] = new("application/json", () => Post(Logits, Json("{}")), 415, "unsupported-media-type"),
        ["logits: unknown model"] = new("model 'nope'", () => Post("/v1/models/nope/logits", Form(("logits", GoodNpy))), 404, "model-not-found"),
        ["logits: empty file"] = new("0-byte part", () => Post(Logits, Form(("logits", Array.Empty<byte>()))), 400, "npy-format"),
        ["logits: not npy"] = new("text as logits", () => Post(Logits, Form(("logits", Encoding.ASCII.GetBytes("hello world, not an array")))), 400, "npy-format"),
        ["logits: int32 dtype"] = new("'<i4' header", () => Post(Logits, Form(("logits", NpyHeader("{'descr': '<i4', 'fortran_order': False, 'shape': (4, 2, 2), }")))), 400, "npy-format"),
        ["logits: shape beyond data"] = new("shape (4, 60000, 60000) over 16 bytes", () => Post(Logits, Form(("logits", NpyHeader("{'descr': '<f4', 'fortran_order': False, 'shape': (4, 60000, 60000), }")))), 400, "npy-format"),
        ["logits: negative dimension"] = new("shape (4, -2, 2)", () => Post(Logits, Form(("logits", NpyHeader("{'descr': '<f4', 'fortran_order': False, 'shape': (4, -2, 2), }")))), 400, "npy-format"),
        ["logits: fortran order"] = new("fortran_order True", () => Post(Logits, Form(("logits", NpyHeader("{'descr': '<f4', 'fortran_order': True, 'shape': (4, 1, 1), }")))), 400, "npy-format"),
        ["logits: NaN values"] = new("NaN everywhere", () => Post(Logits, Form(("logits", Npy(Enumerable.Repeat(float.NaN, 4 * 4 * 4).ToArray(), [4, 4, 4])))), 400, "logits-non-finite"),
        ["logits: wrong class count"] = new("7 classes for a 4-class model", () => Post(Logits, Form(("logits", Npy(new float[7 * 4 * 4], [7, 4, 4])))), 422, "model-class-mismatch"),
        ["logits: one-dimensional"] = new("shape (16,)", () => Post(Logits, Form(("logits", Npy(new float[16], [16])))), 400, "logits-shape"),
        ["logits: NaN threshold"] = new("threshold NaN", () => Post(Logits, Form(("logits", GoodNpy), ("threshold", "NaN"))), 400, "validation-failed"),
        ["logits: negative minArea"] = new("minArea -1", () => Post(Logits, Form(("logits", GoodNpy), ("minArea", "-1"))), 400, "validation-failed"),
        ["logits: giant frame size"] = new("frameWidth=frameHeight=100000", () => Post(Logits, Form(("logits", GoodNpy), ("frameWidth", "100000"), ("frameHeight", "100000"))), 400, "validation-failed"),
        ["logits: width without height"] = new("frameWidth only", () => Post(Logits, Form(("logits", GoodNpy), ("frameWidth", "64"))), 400, "validation-failed"),
        ["logits: unknown method"] = new("method 'guess'", () => Post(Logits, Form(("logits", GoodNpy), ("method", "guess"))), 400, "validation-failed"),
        ["logits: bad capture time"] = new("captureTime 'yesterday'", () => Post(Logits, Form(("logits", GoodNpy), ("captureTime", "yesterday"))), 400, "validation-failed"),
        ["logits: control character id"] = new("clientFrameId with ESC", () => Post(Logits, Form(("logits", GoodNpy), ("clientFrameId", "cam\u001b[2J"))), 400, "validation-failed"),
        ["logits: overlay without image"] = new("artifacts overlay", () => Post(Logits, Form(("logits", GoodNpy), ("artifacts", "overlay"))), 400, "validation-failed"),
        ["logits: bad response mode"] = new("response xml", () => Post(Logits, Form(("logits", GoodNpy), ("response", "xml"))), 400, "validation-failed"),
        ["logits: height and width swapped"] = new("8×8 logits onto a 64×16 frame", () => Post(Logits, Form(("logits", GoodNpy), ("frameWidth", "64"), ("frameHeight", "16"))), 400, "logits-aspect"),
        ["logits: bad stretch value"] = new("stretch 'maybe'", () => Post(Logits, Form(("logits", GoodNpy), ("stretch", "maybe"))), 400, "validation-failed"),
        ["logits: body over the limit"] = new("1.1 MiB part, 1 MiB limit", () => Post(Logits, Form(("logits", new byte[1_150_000]))), 413, "payload-too-large"),

        // Image upload.
        ["frames: truncated multipart body"] = new("2/3 of a valid body", () => Post(Frames, Truncated(("frame", Png))), 400, "form-invalid"),
        ["frames: two frame parts"] = new("file part 'frame' twice", () => Post(Frames, Form(("frame", Png), ("frame", Png))), 400, "validation-failed"),
        ["frames: frame size field"] = new("frameWidth on an image", () => Post(Frames, Form(("frame", Png), ("frameWidth", "10"), ("frameHeight", "10"))), 400, "validation-failed"),
        ["frames: stretch field"] = new("stretch on an image", () => Post(Frames, Form(("frame", Png), ("stretch", "on"))), 400, "validation-failed"),
        ["frames: text as image"] = new("'hello' as frame", () => Post(Frames, Form(("frame", Encoding.ASCII.GetBytes("hello")), ("method", "maxlogit"))), 415, "frame-format"),
        ["frames: empty image"] = new("0-byte frame", () => Post(Frames, Form(("frame", Array.Empty<byte>()), ("method", "maxlogit"))), 415, "frame-format"),
        ["frames: header claims 10^10 pixels"] = new("PNG IHDR 100000×100000", () => Post(Frames, Form(("frame", HugePng()), ("method", "maxlogit"))), 413, "frame-too-large"),
        ["frames: truncated WebP"] = new("first half of a lossy WebP", () => Post(Frames, Form(("frame", HalfWebp()), ("method", "maxlogit"))), 400, "frame-corrupt"),
        ["frames: truncated PNG"] = new("first 60 bytes of a PNG", () => Post(Frames, Form(("frame", Png[..60]), ("method", "maxlogit"))), 400, "frame-corrupt"),

        // Batches.
        ["batches: truncated multipart body"] = new("2/3 of an archive upload", () => Post(Batches, Truncated(("model", "tiny"), ("file", Zip(("a.png", Png))))), 400, "form-invalid"),
        ["batches: two file parts"] = new("file twice, the second with ../", () => Post(Batches, Form(("model", "tiny"), ("file", Zip(("a.png", Png))), ("file", Zip(("../evil.png", Png))))), 400, "validation-failed"),
        ["batches: repeated model field"] = new("model twice", () => Post(Batches, Form(("model", "tiny"), ("model", "apron-a"), ("file", Zip(("a.png", Png))))), 400, "validation-failed"),
        ["batches: unknown field"] = new("field 'folder' in a multipart upload", () => Post(Batches, Form(("model", "tiny"), ("folder", "x"), ("file", Zip(("a.png", Png))))), 400, "validation-failed"),
        ["batches: no file part"] = new("model field only", () => Post(Batches, Form(("model", "tiny"))), 400, "validation-failed"),
        ["batches: malformed json"] = new("'{\"model\":'", () => Post(Batches, Json("{\"model\":")), 400, "bad-request"),
        ["batches: folder with .."] = new("folder '../x'", () => Post(Batches, Json("""{"model":"tiny","folder":"../x"}""")), 400, "path-outside-data"),
        ["batches: absolute folder"] = new("folder '/etc'", () => Post(Batches, Json("""{"model":"tiny","folder":"/etc"}""")), 400, "path-outside-data"),
        ["batches: NUL in folder"] = new("folder 'a\\u0000b'", () => Post(Batches, Json("""{"model":"tiny","folder":"a\u0000b"}""")), 400, "path-outside-data"),
        ["batches: no folder"] = new("{\"model\":\"tiny\"}", () => Post(Batches, Json("""{"model":"tiny"}""")), 400, "validation-failed"),
        ["batches: missing folder"] = new("folder 'nope'", () => Post(Batches, Json("""{"model":"tiny","folder":"nope"}""")), 404, "folder-not-found"),
        ["batches: bad batch id"] = new("batchId '../x'", () => Post(Batches, Json("""{"model":"tiny","folder":"empty","batchId":"../x"}""")), 400, "validation-failed"),
        ["batches: callback not allowed"] = new("callbackUrl to loopback", () => Post(Batches, Json("""{"model":"tiny","folder":"empty","callbackUrl":"http://127.0.0.1:9/x"}""")), 400, "callback-not-allowed"),
        ["batches: unknown artifact"] = new("artifacts 'overlay,heet'", () => Post(Batches, Json("""{"model":"tiny","folder":"empty","artifacts":"overlay,heet"}""")), 400, "validation-failed"),
        ["batches: unknown artifact in an upload"] = new("artifacts field 'everything'", () => Post(Batches, Form(("model", "tiny"), ("artifacts", "everything"), ("file", Zip(("a.png", Png))))), 400, "validation-failed"),
        ["batches: artifacts as a list"] = new("artifacts [\"mask\"]", () => Post(Batches, Json("""{"model":"tiny","folder":"empty","artifacts":["mask"]}""")), 400, "bad-request"),
        ["batches: archive escape"] = new("zip entry '../evil.png'", () => Post(Batches, Form(("model", "tiny"), ("file", Zip(("../evil.png", Png))))), 400, "archive-escape"),
        ["batches: absolute archive entry"] = new("zip entry '/tmp/evil.png'", () => Post(Batches, Form(("model", "tiny"), ("file", Zip(("/tmp/evil.png", Png))))), 400, "archive-escape"),
        ["batches: not an archive"] = new("text as file", () => Post(Batches, Form(("model", "tiny"), ("file", Encoding.ASCII.GetBytes("not an archive at all")))), 400, "archive-invalid"),
        ["batches: understated zip entry"] = new("entry declares 100 of its bytes", () => Post(Batches, Form(("model", "tiny"), ("file", PatchedZip(Png, size: 100)))), 400, "archive-invalid"),
        ["batches: zip entry failing CRC"] = new("CRC-32 0xDEADBEEF", () => Post(Batches, Form(("model", "tiny"), ("file", PatchedZip(Png, crc: 0xDEADBEEF)))), 400, "archive-invalid"),
        ["batches: plain text body"] = new("text/plain", () => Post(Batches, new StringContent("folder=x")), 415, "unsupported-media-type"),
        ["batches: limit not a number"] = new("?limit=abc", () => Get(Batches + "?limit=abc"), 400, "bad-request"),
        ["batches: encoded traversal id"] = new("/v1/batches/..%2F..%2Fetc", () => Get(Batches + "/..%2F..%2Fetc"), 404, "batch-not-found"),
        ["batches: list by unknown state"] = new("?state=Done (states are lower case)", () => Get(Batches + "?state=Done"), 400, "validation-failed"),
        ["batches: manifest of unknown batch"] = new("?verdict=junk on 'nope'", () => Get(Batches + "/nope/manifest?verdict=junk"), 404, "batch-not-found"),
        ["batches: cancel unknown"] = new("POST /v1/batches/nope/cancel", () => Post(Batches + "/nope/cancel", Json("")), 404, "batch-not-found"),

        // Calibrations.
        ["calibrations: malformed json"] = new("'{\"folder\":'", () => Post(Calibrations, Json("{\"folder\":")), 400, "bad-request"),
        ["calibrations: wrong json type"] = new("ignoreLabel as text", () => Post(Calibrations, Json("""{"folder":"empty","ignoreLabel":"x"}""")), 400, "bad-request"),
        ["calibrations: json null"] = new("'null'", () => Post(Calibrations, Json("null")), 400, "validation-failed"),
        ["calibrations: truncated multipart body"] = new("2/3 of an archive upload", () => Post(Calibrations, Truncated(("file", Zip(("a.png", Png))))), 400, "form-invalid"),
        ["calibrations: two file parts"] = new("file twice", () => Post(Calibrations, Form(("file", Zip(("a.png", Png))), ("file", Zip(("../b.png", Png))))), 400, "validation-failed"),
        ["calibrations: archive escape"] = new("zip entry '../x.png'", () => Post(Calibrations, Form(("file", Zip(("../x.png", Png))))), 400, "archive-escape"),
        ["calibrations: folder outside"] = new("folder '../../etc'", () => Post(Calibrations, Json("""{"folder":"../../etc"}""")), 400, "path-outside-data"),
        ["calibrations: ignore label range"] = new("ignoreLabel 70000", () => Post(Calibrations, Json("""{"folder":"empty","ignoreLabel":70000}""")), 400, "validation-failed"),
        ["calibrations: unknown job"] = new("GET /v1/calibrations/nope", () => Get("/v1/calibrations/nope"), 404, "job-not-found"),
        ["calibrations: activate unknown"] = new("POST /v1/calibrations/nope/activate", () => Post("/v1/calibrations/nope/activate", Json("")), 404, "job-not-found"),

        // Evaluations.
        ["evaluations: malformed json"] = new("'{\"dataset\":'", () => Post(Evaluations, Json("{\"dataset\":")), 400, "bad-request"),
        ["evaluations: dataset outside"] = new("dataset '../x'", () => Post(Evaluations, Json("""{"dataset":"../x"}""")), 400, "path-outside-data"),
        ["evaluations: missing dataset"] = new("dataset 'nope'", () => Post(Evaluations, Json("""{"dataset":"nope"}""")), 404, "dataset-missing"),
        ["evaluations: no dataset"] = new("{}", () => Post(Evaluations, Json("{}")), 400, "validation-failed"),
        ["evaluations: file of unknown job"] = new("GET /v1/evaluations/nope/files/x", () => Get("/v1/evaluations/nope/files/..%2F..%2Fetc"), 404, "job-not-found"),

        // Scoring profile.
        ["profile: options null"] = new("{\"options\": null}", () => Put(Profile, Json("""{"options": null}""")), 400, "validation-failed"),
        ["profile: empty object"] = new("{}", () => Put(Profile, Json("{}")), 400, "validation-failed"),
        ["profile: version only"] = new("{\"version\":\"x\"}", () => Put(Profile, Json("""{"version":"x"}""")), 400, "validation-failed"),
        ["profile: partial options"] = new("options.threshold only", () => Put(Profile, Json("""{"options":{"threshold":3}}""")), 400, "validation-failed"),
        ["profile: contradictory threshold"] = new("threshold 5 beside options.threshold 2", () => Put(Profile, Json("{\"threshold\": 5, " + FullOptions + "}")), 400, "validation-failed"),
        ["profile: traversal version"] = new("version '../../evil'", () => Put(Profile, Json("{\"version\": \"../../evil\", " + FullOptions + "}")), 400, "validation-failed"),
        ["profile: 10000-character version"] = new("version of 10000 'a'", () => Put(Profile, Json("{\"version\": \"" + new string('a', 10_000) + "\", " + FullOptions + "}")), 400, "validation-failed"),
        ["profile: not json"] = new("'not json'", () => Put(Profile, Json("not json")), 400, "validation-failed"),
        ["profile: array"] = new("[]", () => Put(Profile, Json("[]")), 400, "validation-failed"),
        ["profile: plain text"] = new("text/plain", () => Put(Profile, new StringContent("{}")), 415, "unsupported-media-type"),
        ["profile: unknown model"] = new("model 'nope'", () => Put("/v1/models/nope/profile", Json("{" + FullOptions + "}")), 404, "model-not-found"),

        // Artifacts, models, review.
        ["artifacts: traversal frame id"] = new("/v1/frames/..%2F..%2Fetc/mask", () => Get("/v1/frames/..%2F..%2Fetc/mask"), 404, "artifact-not-found"),
        ["artifacts: unknown artifact"] = new("/v1/frames/abc/passwd", () => Get("/v1/frames/abc/passwd"), 404, "artifact-not-found"),
        ["models: encoded traversal name"] = new("/v1/models/..%2F..%2Fetc", () => Get("/v1/models/..%2F..%2Fetc"), 404, "model-not-found"),
        ["models: drift of unknown"] = new("/v1/models/nope/drift", () => Get("/v1/models/nope/drift"), 404, "model-not-found"),
        ["review: overview of unknown batch"] = new("/v1/batches/nope/review", () => Get("/v1/batches/nope/review"), 404, "batch-not-found"),
        ["review: malformed decision json"] = new("'{' as a decision", () => Put("/v1/batches/nope/frames/1/decision", Json("{")), 400, "bad-request"),
        ["review: malformed track decision json"] = new("'{' as a track decision", () => Put("/v1/batches/nope/frames/1/tracks/1/decision", Json("{")), 400, "bad-request"),
        ["review: track decision on unknown batch"] = new("batch 'nope'", () => Put("/v1/batches/nope/frames/1/tracks/1/decision", Json("""{"verdict":"unsure"}""")), 404, "batch-not-found"),
        ["review: track number not a number"] = new("/tracks/abc/decision", () => Put("/v1/batches/nope/frames/1/tracks/abc/decision", Json("""{"verdict":"unsure"}""")), 404, "not-found"),
        ["review: recording of unknown batch"] = new("/v1/batches/nope/frames/1/recording", () => Get("/v1/batches/nope/frames/1/recording"), 404, "batch-not-found"),
        ["review: log cursor not a number"] = new("?after=abc", () => Get("/v1/batches/nope/decisions/log?after=abc"), 400, "bad-request"),
        ["any: method not allowed"] = new("DELETE /v1/models", () => new HttpRequestMessage(HttpMethod.Delete, "/v1/models"), 405, "method-not-allowed"),
        ["any: unknown route"] = new("/v1/nothing", () => Get("/v1/nothing"), 404, "not-found"),
    };

    public static TheoryData<string> CaseNames() => new(Cases.Keys);

    [Fact]
    public void The_table_covers_at_least_sixty_cases() => Assert.True(Cases.Count >= 60, $"{Cases.Count} cases");

    [Theory]
    [MemberData(nameof(CaseNames))]
    public async Task Hostile_input_is_refused_with_its_code_and_never_a_5xx(string name)
    {
        var c = Cases[name];
        var response = await fixture.Service.Client.SendAsync(c.Request());
        Assert.True((int)response.StatusCode < 500, $"{name} ({c.Input}): {(int)response.StatusCode} {await response.Content.ReadAsStringAsync()}");
        await TestService.ProblemAsync(response, c.Status, c.Code);
    }
}
