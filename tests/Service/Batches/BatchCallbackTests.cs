using System.Collections.Concurrent;
using System.Net;
using System.Text.Json;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Batches;

public class BatchCallbackTests
{
    private static Dictionary<string, string?> CallbackConfig(params int[] ports)
    {
        var c = new Dictionary<string, string?>
        {
            ["Service:Batches:CallbackAttempts"] = "3",
            ["Service:Batches:CallbackFirstRetry"] = "00:00:00.050",
            ["Service:Batches:CallbackTimeout"] = "00:00:02",
        };
        for (int i = 0; i < ports.Length; i++) c[$"Service:Batches:CallbackOrigins:{i}"] = $"http://127.0.0.1:{ports[i]}";
        return c;
    }

    [Fact]
    public async Task Completion_callback_is_retried_after_a_failure_and_carries_the_batch_summary()
    {
        int port = FreePort();
        using var listener = new HttpListener();
        listener.Prefixes.Add($"http://127.0.0.1:{port}/");
        listener.Start();
        var bodies = new ConcurrentQueue<string>();
        var serve = Task.Run(async () =>
        {
            for (int i = 0; i < 2; i++)
            {
                var ctx = await listener.GetContextAsync();
                using (var reader = new StreamReader(ctx.Request.InputStream)) bodies.Enqueue(await reader.ReadToEndAsync());
                ctx.Response.StatusCode = i == 0 ? 500 : 204; // first attempt fails
                ctx.Response.Close();
            }
        });

        await using var s = await StartAsync(extra: CallbackConfig(port));
        WriteFrames(Path.Combine(s.DataRoot, "cb"), 2, debris: 1);
        await PostFolderAsync(s.Client, "cb", batchId: "cb-1", callbackUrl: $"http://127.0.0.1:{port}/hooks/done");
        var b = await WaitAsync(s.Client, "cb-1", x => x.GetProperty("callback").GetProperty("state").GetString() == "delivered");
        Assert.Equal(2, b.GetProperty("callback").GetProperty("attempts").GetInt32());
        await serve.WaitAsync(TimeSpan.FromSeconds(10));

        Assert.Equal(2, bodies.Count);
        foreach (string body in bodies)
        {
            var json = JsonDocument.Parse(body).RootElement;
            Assert.Equal("cb-1", json.GetProperty("id").GetString());
            Assert.Equal("done", json.GetProperty("state").GetString());
            Assert.Equal(2, json.GetProperty("frames").GetProperty("done").GetInt32());
            Assert.Equal("/v1/batches/cb-1/manifest", json.GetProperty("manifest").GetString());
        }
    }

    [Fact]
    public async Task An_unreachable_callback_gives_up_after_the_bounded_attempts_without_holding_up_other_batches()
    {
        int dead = FreePort(); // nothing listens here
        await using var s = await StartAsync(extra: CallbackConfig(dead));
        WriteFrames(Path.Combine(s.DataRoot, "a"), 1);
        WriteFrames(Path.Combine(s.DataRoot, "b"), 1, seed: 5);
        await PostFolderAsync(s.Client, "a", batchId: "a-1", callbackUrl: $"http://127.0.0.1:{dead}/x");
        await PostFolderAsync(s.Client, "b", batchId: "b-1");
        await WaitForStateAsync(s.Client, "b-1", "done");
        var a = await WaitAsync(s.Client, "a-1", x => x.GetProperty("callback").GetProperty("state").GetString() == "failed");
        Assert.Equal("done", a.GetProperty("state").GetString());
        Assert.Equal(3, a.GetProperty("callback").GetProperty("attempts").GetInt32());
    }
}
