using System.Net;
using System.Net.Http.Json;
using System.Text.Json;
using Microsoft.AspNetCore.TestHost;
using Strayspot.Service.Review;
using Strayspot.Tests.Service.Api;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Review;

/// <summary>The decisions resource of a batch over HTTP: recording, listing, the manifest, and refusals.</summary>
public class DecisionsApiTests
{
    /// <summary>A done batch of four frames, two with debris; returns the service and the seq of a frame with regions.</summary>
    private static async Task<(TestService Service, int Seq, int Regions)> ScoredBatchAsync(string batchId = "rev")
    {
        var s = await StartAsync();
        await DoneBatchAsync(s, "apron", batchId, 4, debris: 2);
        var frames = (await GetAsync(s.Client, $"/v1/batches/{batchId}/frames")).GetProperty("frames").EnumerateArray()
            .Where(f => f.GetProperty("regionCount").GetInt32() > 0).ToList();
        Assert.NotEmpty(frames);
        return (s, frames[0].GetProperty("seq").GetInt32(), frames[0].GetProperty("regionCount").GetInt32());
    }

    private static async Task<JsonElement> PutAsync(HttpClient c, string path, object body, HttpStatusCode expected = HttpStatusCode.OK)
    {
        var r = await c.PutAsJsonAsync(path, body);
        string text = await r.Content.ReadAsStringAsync();
        Assert.True(expected == r.StatusCode, $"PUT {path}: expected {(int)expected}, got {(int)r.StatusCode}: {text}");
        return text.Length == 0 ? default : JsonDocument.Parse(text).RootElement;
    }

    private static void AssertCode(JsonElement problem, string code) => Assert.Equal(code, problem.GetProperty("code").GetString());

    [Fact]
    public async Task Decisions_on_regions_and_frames_are_listed_filtered_and_carried_into_the_manifest()
    {
        var (s, seq, _) = await ScoredBatchAsync();
        await using var _ = s;
        var region = await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/regions/1/decision", new { verdict = "label-it", note = "tow bar part" });
        Assert.Equal("label-it", region.GetProperty("verdict").GetString());
        Assert.Equal(1, region.GetProperty("region").GetInt32());
        Assert.Equal("tow bar part", region.GetProperty("note").GetString());
        var frames = await FramesAsync(s.Client, "rev");
        int other = frames.Values.Select(f => f.GetProperty("seq").GetInt32()).First(x => x != seq);
        var frame = await PutAsync(s.Client, $"/v1/batches/rev/frames/{other}/decision", new { verdict = "false-alarm" });
        Assert.Equal(JsonValueKind.Null, frame.GetProperty("region").ValueKind);
        Assert.True(frame.GetProperty("revision").GetInt64() > region.GetProperty("revision").GetInt64());

        var all = (await GetAsync(s.Client, "/v1/batches/rev/decisions")).GetProperty("decisions");
        Assert.Equal(2, all.GetArrayLength());
        var accepted = (await GetAsync(s.Client, "/v1/batches/rev/decisions?verdict=label-it")).GetProperty("decisions");
        Assert.Single(accepted.EnumerateArray());
        Assert.Equal(seq, accepted[0].GetProperty("seq").GetInt32());

        var lines = await ManifestAsync(s.Client, "rev");
        var decided = lines.Single(l => l.GetProperty("seq").GetInt32() == seq);
        var mark = decided.GetProperty("regions").EnumerateArray().Single(r => r.GetProperty("id").GetInt32() == 1).GetProperty("decision");
        Assert.Equal("label-it", mark.GetProperty("verdict").GetString());
        Assert.Equal("tow bar part", mark.GetProperty("note").GetString());
        Assert.Equal("false-alarm", lines.Single(l => l.GetProperty("seq").GetInt32() == other).GetProperty("decision").GetProperty("verdict").GetString());
        // The manifest file in the batch folder is rewritten with the decisions too: that is the re-export.
        string file = File.ReadAllText(Path.Combine(s.DataRoot, "batches", "rev", "manifest.jsonl"));
        Assert.Contains("tow bar part", file);

        var onlyAccepted = await s.Client.GetStringAsync("/v1/batches/rev/manifest?verdict=label-it");
        var acceptedLines = onlyAccepted.Split('\n', StringSplitOptions.RemoveEmptyEntries);
        Assert.Single(acceptedLines);
        Assert.Equal(seq, JsonDocument.Parse(acceptedLines[0]).RootElement.GetProperty("seq").GetInt32());
    }

    [Fact]
    public async Task A_withdrawn_decision_leaves_the_list_but_stays_in_the_log()
    {
        var (s, seq, _) = await ScoredBatchAsync();
        await using var _ = s;
        await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/regions/1/decision", new { verdict = "unsure" });
        var gone = await s.Client.DeleteAsync($"/v1/batches/rev/frames/{seq}/regions/1/decision");
        Assert.Equal(HttpStatusCode.NoContent, gone.StatusCode);
        Assert.Equal(0, (await GetAsync(s.Client, "/v1/batches/rev/decisions")).GetProperty("decisions").GetArrayLength());
        var again = await s.Client.DeleteAsync($"/v1/batches/rev/frames/{seq}/regions/1/decision");
        Assert.Equal(HttpStatusCode.NotFound, again.StatusCode);
        var log = (await GetAsync(s.Client, "/v1/batches/rev/decisions/log")).GetProperty("entries");
        Assert.Equal(2, log.GetArrayLength());
        Assert.Equal("unsure", log[0].GetProperty("verdict").GetString());
        Assert.Equal(JsonValueKind.Null, log[1].GetProperty("verdict").ValueKind);
        var after = (await GetAsync(s.Client, $"/v1/batches/rev/decisions/log?after={log[0].GetProperty("revision").GetInt64()}")).GetProperty("entries");
        Assert.Single(after.EnumerateArray());
    }

    [Fact]
    public async Task Bad_targets_and_bad_bodies_get_their_own_codes()
    {
        var (s, seq, regions) = await ScoredBatchAsync();
        await using var _ = s;
        AssertCode(await PutAsync(s.Client, $"/v1/batches/nope/frames/{seq}/decision", new { verdict = "unsure" }, HttpStatusCode.NotFound), "batch-not-found");
        AssertCode(await PutAsync(s.Client, "/v1/batches/rev/frames/999/decision", new { verdict = "unsure" }, HttpStatusCode.NotFound), "frame-not-found");
        var region = await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/regions/{regions + 1}/decision", new { verdict = "unsure" }, HttpStatusCode.NotFound);
        AssertCode(region, "region-not-found");
        Assert.Contains($"1 to {regions}", region.GetProperty("detail").GetString());
        AssertCode(await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/regions/0/decision", new { verdict = "unsure" }, HttpStatusCode.NotFound), "region-not-found");
        AssertCode(await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/decision", new { verdict = "maybe" }, HttpStatusCode.BadRequest), "validation-failed");
        AssertCode(await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/decision", new { note = "no verdict" }, HttpStatusCode.BadRequest), "validation-failed");
        var longNote = new string('x', BatchReview.MaxNoteLength + 1);
        var tooLong = await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/decision", new { verdict = "unsure", note = longNote }, HttpStatusCode.BadRequest);
        AssertCode(tooLong, "note-too-long");
        AssertCode(await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/decision", new { verdict = "unsure", note = "bell\u0007" }, HttpStatusCode.BadRequest), "validation-failed");
        AssertCode(await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/decision", new { verdict = "unsure", reviewer = new string('r', 65) }, HttpStatusCode.BadRequest), "validation-failed");
        AssertCode(await ProblemAsync(s.Client, "/v1/batches/rev/decisions?verdict=yes", HttpStatusCode.BadRequest), "validation-failed");
        AssertCode(await ProblemAsync(s.Client, "/v1/batches/rev/manifest?verdict=yes", HttpStatusCode.BadRequest), "validation-failed");
        // A note of exactly the limit is kept whole; nothing refused above was stored.
        var atLimit = await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/decision", new { verdict = "unsure", note = new string('y', BatchReview.MaxNoteLength) });
        Assert.Equal(BatchReview.MaxNoteLength, atLimit.GetProperty("note").GetString()!.Length);
        Assert.Equal(1, (await GetAsync(s.Client, "/v1/batches/rev/decisions/log")).GetProperty("entries").GetArrayLength());
        var notJson = await s.Client.PutAsync($"/v1/batches/rev/frames/{seq}/decision", new StringContent("{verdict:", System.Text.Encoding.UTF8, "application/json"));
        Assert.Equal(HttpStatusCode.BadRequest, notJson.StatusCode);
        Assert.Equal("application/problem+json", notJson.Content.Headers.ContentType?.MediaType);
    }

    private static async Task<JsonElement> ProblemAsync(HttpClient c, string path, HttpStatusCode expected)
    {
        var r = await c.GetAsync(path);
        Assert.Equal(expected, r.StatusCode);
        Assert.Equal("application/problem+json", r.Content.Headers.ContentType?.MediaType);
        return JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement;
    }

    [Fact]
    public async Task Concurrent_decisions_on_one_frame_end_with_the_last_write_and_every_write_logged()
    {
        var (s, seq, regions) = await ScoredBatchAsync();
        await using var _ = s;
        const int writers = 24;
        string[] verdicts = [Verdicts.LabelIt, Verdicts.FalseAlarm, Verdicts.Unsure];
        var tasks = Enumerable.Range(0, writers).Select(i => Task.Run(async () =>
        {
            // Half write region 1, the rest the whole frame or (when there is one) region 2: overlapping and disjoint targets at once.
            string path = i % 2 == 0 ? $"/v1/batches/rev/frames/{seq}/regions/1/decision"
                : regions > 1 && i % 4 == 1 ? $"/v1/batches/rev/frames/{seq}/regions/2/decision"
                : $"/v1/batches/rev/frames/{seq}/decision";
            var r = await s.Client.PutAsJsonAsync(path, new { verdict = verdicts[i % 3], note = $"writer {i}" });
            Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        })).ToArray();
        await Task.WhenAll(tasks);

        var log = (await GetAsync(s.Client, "/v1/batches/rev/decisions/log")).GetProperty("entries").EnumerateArray().ToList();
        Assert.Equal(writers, log.Count);
        Assert.Equal(writers, log.Select(e => e.GetProperty("note").GetString()).Distinct().Count());
        var current = (await GetAsync(s.Client, "/v1/batches/rev/decisions")).GetProperty("decisions").EnumerateArray().ToList();
        var targets = log.GroupBy(e => e.GetProperty("region").ValueKind == JsonValueKind.Null ? 0 : e.GetProperty("region").GetInt32()).ToList();
        Assert.Equal(targets.Count, current.Count);
        foreach (var t in targets)
        {
            var last = t.MaxBy(e => e.GetProperty("revision").GetInt64());
            var now = current.Single(d => (d.GetProperty("region").ValueKind == JsonValueKind.Null ? 0 : d.GetProperty("region").GetInt32()) == t.Key);
            Assert.Equal(last.GetProperty("note").GetString(), now.GetProperty("note").GetString());
            Assert.Equal(last.GetProperty("revision").GetInt64(), now.GetProperty("revision").GetInt64());
        }
    }

    [Fact]
    public async Task Decisions_survive_a_restart_of_the_service()
    {
        var (s, seq, _) = await ScoredBatchAsync();
        string root = s.Root;
        await PutAsync(s.Client, $"/v1/batches/rev/frames/{seq}/regions/1/decision", new { verdict = "false-alarm", note = "painted marking" });
        await s.App.StopAsync();
        await s.App.DisposeAsync();

        try
        {
            await using var again = TestService.BuildOnly(root, Config());
            await again.StartAsync();
            using var client = again.GetTestClient();
            var d = (await GetAsync(client, "/v1/batches/rev/decisions")).GetProperty("decisions");
            Assert.Equal("painted marking", d[0].GetProperty("note").GetString());
            Assert.Equal("false-alarm", d[0].GetProperty("verdict").GetString());
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }
}
