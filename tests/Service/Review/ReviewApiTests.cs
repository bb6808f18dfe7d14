using System.Net;
using System.Net.Http.Json;
using System.Text.Json;
using SixLabors.ImageSharp;
using Strayspot.Tests.Service.Api;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Review;

/// <summary>What the review page reads: the batch overview, one frame with its regions, and the frame's images.</summary>
public class ReviewApiTests
{
    [Fact]
    public async Task Overview_ranks_scored_frames_counts_decisions_and_names_what_produced_the_scores()
    {
        await using var s = await StartAsync();
        await DoneBatchAsync(s, "apron", "ov", 4, debris: 2);
        var first = await GetAsync(s.Client, "/v1/batches/ov/review");
        var frames = first.GetProperty("frames").EnumerateArray().ToList();
        Assert.Equal(4, frames.Count);
        var scores = frames.Select(f => f.GetProperty("frameScore").GetSingle()).ToList();
        Assert.Equal(scores.OrderByDescending(x => x), scores);
        var top = frames[0];
        int seq = top.GetProperty("seq").GetInt32();
        Assert.True(top.GetProperty("regionCount").GetInt32() > 0);

        var provenance = first.GetProperty("provenance");
        Assert.Equal(Model, provenance.GetProperty("model").GetString());
        Assert.Equal(64, provenance.GetProperty("modelSha256").GetString()!.Length);
        Assert.False(string.IsNullOrEmpty(provenance.GetProperty("profileVersion").GetString()));
        Assert.Equal("calibration.json", provenance.GetProperty("calibration").GetProperty("file").GetString());
        Assert.Contains("not a certified safety function", first.GetProperty("notice").GetString());

        // Class colours are the descriptor's own, as #rrggbb.
        var descriptor = JsonDocument.Parse(File.ReadAllText(Path.Combine(s.ModelsRoot, Model, "descriptor.json"))).RootElement.GetProperty("classes");
        var classes = first.GetProperty("classes");
        Assert.Equal(descriptor.GetArrayLength(), classes.GetArrayLength());
        for (int i = 0; i < classes.GetArrayLength(); i++)
        {
            Assert.Equal(descriptor[i].GetProperty("name").GetString(), classes[i].GetProperty("name").GetString());
            if (descriptor[i].TryGetProperty("color", out var color))
                Assert.Equal(color.GetString()!.ToLowerInvariant(), classes[i].GetProperty("color").GetString());
            bool surface = descriptor[i].TryGetProperty("surface", out var sf) && sf.GetBoolean();
            Assert.Equal(surface, classes[i].GetProperty("surface").GetBoolean());
        }

        var detail = await GetAsync(s.Client, $"/v1/batches/ov/frames/{seq}");
        var regions = detail.GetProperty("regions");
        // The descriptor's surface classes mark regions without dropping any: a region standing on one is on a surface.
        var surfaceNames = classes.EnumerateArray().Where(c => c.GetProperty("surface").GetBoolean()).Select(c => c.GetProperty("name").GetString()).ToHashSet();
        Assert.NotEmpty(surfaceNames);
        foreach (var r in regions.EnumerateArray())
            if (surfaceNames.Contains(r.GetProperty("classBeneathName").GetString()))
                Assert.True(r.GetProperty("onSurface").GetBoolean(), r.ToString());
        Assert.Contains(regions.EnumerateArray(), r => r.GetProperty("onSurface").GetBoolean());
        string beneath = regions[0].GetProperty("classBeneathName").GetString()!;
        await s.Client.PutAsJsonAsync($"/v1/batches/ov/frames/{seq}/regions/{regions[0].GetProperty("id").GetInt32()}/decision", new { verdict = "false-alarm" });
        var after = await GetAsync(s.Client, "/v1/batches/ov/review");
        var counts = after.GetProperty("counts");
        // One region of several decided: the frame is in progress, not reviewed.
        Assert.True(regions.GetArrayLength() > 1);
        Assert.Equal(0, counts.GetProperty("frames").GetProperty("reviewed").GetInt32());
        Assert.Equal(1, counts.GetProperty("frames").GetProperty("inProgress").GetInt32());
        Assert.Equal(1, counts.GetProperty("regions").GetProperty("verdicts").GetProperty("falseAlarm").GetInt32());
        var byClass = counts.GetProperty("byClassBeneath").EnumerateArray().Single(c => c.GetProperty("classBeneathName").GetString() == beneath);
        // One vocabulary: the tally carries the class index beside the name, as regions and frame reports do.
        Assert.Equal(regions[0].GetProperty("classBeneath").GetInt32(), byClass.GetProperty("classBeneath").GetInt32());
        Assert.True(byClass.GetProperty("falseAlarmRate").GetDouble() > 0);
        Assert.Equal(1, after.GetProperty("frames")[0].GetProperty("regionsDecided").GetInt32());
        Assert.Equal(JsonValueKind.Null, after.GetProperty("evaluation").ValueKind);
    }

    [Fact]
    public async Task A_frame_lists_its_regions_and_serves_its_source_and_artifacts_at_frame_size()
    {
        await using var s = await StartAsync();
        await DoneBatchAsync(s, "apron", "fr", 2, debris: 1, artifacts: "all");
        var overview = await GetAsync(s.Client, "/v1/batches/fr/review");
        int seq = overview.GetProperty("frames")[0].GetProperty("seq").GetInt32();
        var frame = await GetAsync(s.Client, $"/v1/batches/fr/frames/{seq}");
        Assert.Equal(Width, frame.GetProperty("width").GetInt32());
        Assert.Equal(Height, frame.GetProperty("height").GetInt32());
        Assert.True(frame.GetProperty("threshold").GetSingle() > 0);
        var files = frame.GetProperty("files");
        foreach (string name in new[] { "source", "heat", "mask", "classes", "overlay" })
        {
            var r = await s.Client.GetAsync(files.GetProperty(name).GetString());
            Assert.Equal(HttpStatusCode.OK, r.StatusCode);
            Assert.Equal("image/png", r.Content.Headers.ContentType?.MediaType);
            var info = Image.Identify(await r.Content.ReadAsByteArrayAsync());
            // The overlay stands alone: the frame with its legend strip below.
            int strip = name == "overlay" ? Strayspot.Service.Rendering.OverlayRenderer.StripHeight(Strayspot.Service.Rendering.OverlayRenderer.GlyphScaleFor(Width, Height)) : 0;
            Assert.Equal((Width, Height + strip), (info.Width, info.Height));
        }
        var report = await s.Client.GetAsync(files.GetProperty("report").GetString());
        Assert.Equal("application/json", report.Content.Headers.ContentType?.MediaType);

        // A damaged report still leaves the frame viewable: its size then comes from the mask.
        string reportFile = Path.Combine(s.DataRoot, "batches", "fr", "frames", $"{seq:D5}", "report.json");
        Assert.True(File.Exists(reportFile), reportFile);
        File.WriteAllText(reportFile, "{ not json");
        var damaged = await GetAsync(s.Client, $"/v1/batches/fr/frames/{seq}");
        Assert.Equal((Width, Height), (damaged.GetProperty("width").GetInt32(), damaged.GetProperty("height").GetInt32()));

        var unknown = await s.Client.GetAsync($"/v1/batches/fr/frames/{seq}/files/..%2Fmanifest.jsonl");
        Assert.Equal(HttpStatusCode.NotFound, unknown.StatusCode);
        Assert.Equal("artifact-not-found", JsonDocument.Parse(await unknown.Content.ReadAsStringAsync()).RootElement.GetProperty("code").GetString());
        var noFrame = await s.Client.GetAsync("/v1/batches/fr/frames/77");
        Assert.Equal("frame-not-found", JsonDocument.Parse(await noFrame.Content.ReadAsStringAsync()).RootElement.GetProperty("code").GetString());
        var noBatch = await s.Client.GetAsync("/v1/batches/none/review");
        Assert.Equal("batch-not-found", JsonDocument.Parse(await noBatch.Content.ReadAsStringAsync()).RootElement.GetProperty("code").GetString());
    }

    [Fact]
    public async Task A_frame_not_yet_scored_cannot_be_decided_on()
    {
        await using var s = await StartAsync(pause: TimeSpan.FromSeconds(30));
        WriteFrames(Path.Combine(s.DataRoot, "apron"), 3);
        await PostFolderAsync(s.Client, "apron", batchId: "slow");
        await WaitAsync(s.Client, "slow", b => b.GetProperty("frames").GetProperty("done").GetInt32() >= 1);
        var r = await s.Client.PutAsJsonAsync("/v1/batches/slow/frames/3/decision", new { verdict = "unsure" });
        Assert.Equal(HttpStatusCode.Conflict, r.StatusCode);
        Assert.Equal("frame-not-scored", JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement.GetProperty("code").GetString());
    }

    [Fact]
    public async Task The_overview_links_the_models_latest_finished_evaluation()
    {
        await using var s = await StartAsync();
        Evaluation.EvaluationFixtures.WriteFlatDataset(Path.Combine(s.DataRoot, "labeled"), frames: 2);
        await DoneBatchAsync(s, "apron", "ev", 1);
        Assert.Equal(JsonValueKind.Null, (await GetAsync(s.Client, "/v1/batches/ev/review")).GetProperty("evaluation").ValueKind);

        var start = await s.Client.PostAsJsonAsync($"/v1/models/{Model}/evaluations", new { dataset = "labeled" });
        string id = (await start.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("id").GetString()!;
        var until = DateTime.UtcNow.AddSeconds(120);
        while ((await GetAsync(s.Client, $"/v1/evaluations/{id}")).GetProperty("state").GetString() is "queued" or "running")
        {
            Assert.True(DateTime.UtcNow < until, "the evaluation did not finish");
            await Task.Delay(100);
        }
        var link = (await GetAsync(s.Client, "/v1/batches/ev/review")).GetProperty("evaluation");
        Assert.Equal(id, link.GetProperty("id").GetString());
        var report = await s.Client.GetAsync(link.GetProperty("report").GetString());
        Assert.Equal(HttpStatusCode.OK, report.StatusCode);
        Assert.Contains("sml", await report.Content.ReadAsStringAsync());
    }
}
