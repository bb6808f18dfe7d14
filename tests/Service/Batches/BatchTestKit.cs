using System.Net;
using System.Net.Http.Json;
using System.Net.Sockets;
using System.Text.Json;
using Strayspot.Service.Demo;
using Strayspot.Tests.Service.Api;
using Strayspot.Tests.Service.Demo;

namespace Strayspot.Tests.Service.Batches;

/// <summary>Demo model in a temp models root, small generated apron frames, and polling helpers for batch tests.</summary>
public static class BatchTestKit
{
    public const string Model = "demo";
    public const int Width = 256;
    public const int Height = 128;

    /// <summary>Copies the committed demo model (model, descriptor, statistics; not its frames) into a models root.</summary>
    public static void CopyDemoModel(string modelsRoot) => CopyDemoModel(modelsRoot, Model);

    public static void CopyDemoModel(string modelsRoot, string name) =>
        Evaluation.EvaluationFixtures.CopyDemoModel(Path.Combine(modelsRoot, name));

    /// <summary>
    /// Writes <paramref name="count"/> apron frames of 256×128 into <paramref name="folder"/>; the first <paramref name="debris"/>
    /// carry debris. Names: <c>{prefix}NN.png</c> (debris ones end in <c>_debris</c>).
    /// </summary>
    public static List<string> WriteFrames(string folder, int count, int debris = 0, int seed = 11, string prefix = "cam_",
        int width = Width, int height = Height)
    {
        Directory.CreateDirectory(folder);
        var scenes = ApronSceneSet.Normal(count, seed, width, height);
        var names = new List<string>();
        for (int i = 0; i < count; i++)
        {
            var frame = scenes[i];
            string name = $"{prefix}{i:D2}";
            if (i < debris)
            {
                frame = ApronDebrisPainter.Paint(frame, ApronSceneSet.FrameSeed(seed, i) + 7919, 3).Frame;
                name += "_debris";
            }
            name += ".png";
            DemoPng.SaveRgb(Path.Combine(folder, name), frame.Rgb, frame.Width, frame.Height);
            names.Add(name);
        }
        return names;
    }

    public static Dictionary<string, string?> Config(TimeSpan? pause = null, IDictionary<string, string?>? extra = null)
    {
        var c = new Dictionary<string, string?>
        {
            ["Service:Batches:PollInterval"] = "00:00:00.200",
            ["Service:Batches:PauseBetweenFrames"] = (pause ?? TimeSpan.Zero).ToString("c"),
            ["Service:IntraOpThreads"] = "1",
        };
        foreach (var (k, v) in extra ?? new Dictionary<string, string?>()) c[k] = v;
        return c;
    }

    public static Task<TestService> StartAsync(TimeSpan? pause = null, IDictionary<string, string?>? extra = null) =>
        TestService.StartAsync(CopyDemoModel, Config(pause, extra));

    public static async Task<JsonElement> PostFolderAsync(HttpClient client, string folder, string? batchId = null, string? callbackUrl = null,
        HttpStatusCode expected = HttpStatusCode.Created, string? artifacts = null)
    {
        var r = await client.PostAsJsonAsync("/v1/batches", new { model = Model, folder, batchId, callbackUrl, artifacts });
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(expected == r.StatusCode, $"expected {(int)expected}, got {(int)r.StatusCode}: {body}");
        return JsonDocument.Parse(body).RootElement;
    }

    /// <summary>Writes frames into <paramref name="folder"/> under the data root, submits them as a batch and waits until it is done.</summary>
    public static async Task<JsonElement> DoneBatchAsync(TestService s, string folder, string batchId, int frames, int debris = 0,
        string? artifacts = null)
    {
        WriteFrames(Path.Combine(s.DataRoot, folder), frames, debris);
        await PostFolderAsync(s.Client, folder, batchId: batchId, artifacts: artifacts);
        return await WaitForStateAsync(s.Client, batchId, "done");
    }

    public static async Task<JsonElement> GetAsync(HttpClient client, string path)
    {
        var r = await client.GetAsync(path);
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(r.IsSuccessStatusCode, $"GET {path}: {(int)r.StatusCode} {body}");
        return JsonDocument.Parse(body).RootElement;
    }

    /// <summary>Polls the batch until <paramref name="until"/> holds; fails with the last state after <paramref name="timeout"/>.</summary>
    public static async Task<JsonElement> WaitAsync(HttpClient client, string id, Func<JsonElement, bool> until, TimeSpan? timeout = null)
    {
        var deadline = DateTime.UtcNow + (timeout ?? TimeSpan.FromSeconds(30));
        JsonElement last;
        do
        {
            last = await GetAsync(client, $"/v1/batches/{id}");
            if (until(last)) return last;
            await Task.Delay(50);
        } while (DateTime.UtcNow < deadline);
        Assert.Fail($"Batch {id} did not reach the expected state; last: {last}");
        return last;
    }

    public static Task<JsonElement> WaitForStateAsync(HttpClient client, string id, string state, TimeSpan? timeout = null) =>
        WaitAsync(client, id, b => b.GetProperty("state").GetString() == state, timeout);

    public static async Task<List<JsonElement>> ManifestAsync(HttpClient client, string id)
    {
        var r = await client.GetAsync($"/v1/batches/{id}/manifest");
        string body = await r.Content.ReadAsStringAsync();
        Assert.True(r.IsSuccessStatusCode, body);
        Assert.Equal("application/x-ndjson", r.Content.Headers.ContentType?.MediaType);
        return body.Split('\n', StringSplitOptions.RemoveEmptyEntries).Select(l => JsonDocument.Parse(l).RootElement).ToList();
    }

    /// <summary>Waits until the one-frame batch is done and returns its manifest line.</summary>
    public static async Task<JsonElement> WaitManifestLineAsync(HttpClient client, string id)
    {
        var batch = await WaitAsync(client, id, b => b.GetProperty("state").GetString() is "done" or "failed");
        Assert.True(batch.GetProperty("state").GetString() == "done", batch.ToString());
        return Assert.Single(await ManifestAsync(client, id));
    }

    public static async Task<Dictionary<string, JsonElement>> FramesAsync(HttpClient client, string id)
    {
        var json = await GetAsync(client, $"/v1/batches/{id}/frames");
        return json.GetProperty("frames").EnumerateArray().ToDictionary(f => f.GetProperty("frameId").GetString()!, f => f);
    }

    public static int FreePort()
    {
        var l = new TcpListener(IPAddress.Loopback, 0);
        l.Start();
        int port = ((IPEndPoint)l.LocalEndpoint).Port;
        l.Stop();
        return port;
    }
}
