using System.Net;
using System.Net.Http.Json;
using System.Security.Cryptography;
using System.Text.Json;
using Strayspot.Tests.Service.Api;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Batches;

public class BatchesApiTests
{
    private static List<string> FilesOfOnlyFrame(TestService s, string batchId) =>
        Directory.GetFiles(Path.Combine(s.DataRoot, "batches", batchId, "frames", "00001")).Select(Path.GetFileName).Order(StringComparer.Ordinal).ToList()!;

    [Fact]
    public async Task Batches_write_the_lean_artifacts_by_default_and_only_the_ones_asked_for()
    {
        await using var s = await StartAsync();
        WriteFrames(Path.Combine(s.DataRoot, "one"), 1);
        var lean = await PostFolderAsync(s.Client, "one", batchId: "lean");
        Assert.Equal(["mask", "overlay"], lean.GetProperty("batch").GetProperty("artifacts").EnumerateArray().Select(a => a.GetString()));
        await WaitForStateAsync(s.Client, "lean", "done");
        Assert.Equal(["mask.png", "overlay.png", "report.json"], FilesOfOnlyFrame(s, "lean"));
        var line = Assert.Single(await ManifestAsync(s.Client, "lean"));
        Assert.Equal(["mask", "overlay", "report"], line.GetProperty("artifacts").EnumerateObject().Select(p => p.Name).Order(StringComparer.Ordinal));

        await PostFolderAsync(s.Client, "one", batchId: "maps", artifacts: "score, heat");
        await WaitForStateAsync(s.Client, "maps", "done");
        Assert.Equal(["heat.png", "report.json", "score.npy"], FilesOfOnlyFrame(s, "maps"));
        await PostFolderAsync(s.Client, "one", batchId: "bare", artifacts: "none");
        await WaitForStateAsync(s.Client, "bare", "done");
        Assert.Equal(["report.json"], FilesOfOnlyFrame(s, "bare"));
        Assert.Equal(["report"], Assert.Single(await ManifestAsync(s.Client, "bare")).GetProperty("artifacts").EnumerateObject().Select(p => p.Name));

        // A resubmission may not change what the batch's frames get.
        await PostFolderAsync(s.Client, "one", batchId: "bare", artifacts: "all", expected: HttpStatusCode.Conflict);
    }

    [Fact]
    public async Task An_unknown_artifact_is_refused_naming_the_closest_and_nothing_is_stored()
    {
        await using var s = await StartAsync();
        WriteFrames(Path.Combine(s.DataRoot, "one"), 1);
        var r = await s.Client.PostAsJsonAsync("/v1/batches", new { model = Model, folder = "one", batchId = "typo", artifacts = "overlay,heet" });
        var problem = await TestService.ProblemAsync(r, 400, "validation-failed");
        Assert.Contains("'heat'", problem.GetProperty("detail").GetString());
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/batches/typo"), 404, "batch-not-found");
        Assert.False(Directory.Exists(Path.Combine(s.DataRoot, "batches", "typo")));
    }

    [Fact]
    public async Task Folder_batch_runs_to_done_and_its_manifest_lists_every_frame_once_ranked_by_score()
    {
        await using var s = await StartAsync();
        var names = WriteFrames(Path.Combine(s.DataRoot, "shift1"), 4, debris: 2);
        WriteFrames(Path.Combine(s.DataRoot, "shift1", "cam2"), 1, seed: 21, prefix: "side_");
        var created = await PostFolderAsync(s.Client, "shift1", batchId: "shift1-a");
        Assert.True(created.GetProperty("created").GetBoolean());
        Assert.Equal(5, created.GetProperty("framesAdded").GetInt32());
        var done = await WaitForStateAsync(s.Client, "shift1-a", "done");
        Assert.Equal(5, done.GetProperty("frames").GetProperty("done").GetInt32());
        Assert.Equal(0, done.GetProperty("frames").GetProperty("pending").GetInt32());
        Assert.Equal(1.0, done.GetProperty("progress").GetDouble());

        var lines = await ManifestAsync(s.Client, "shift1-a");
        var ids = lines.Select(l => l.GetProperty("frameId").GetString()!).ToList();
        Assert.Equal(names.Append("cam2/side_00.png").Order(StringComparer.Ordinal), ids.Order(StringComparer.Ordinal));
        var scores = lines.Select(l => l.GetProperty("frameScore").GetSingle()).ToList();
        Assert.Equal(scores.OrderByDescending(x => x), scores);
        // The hash is computed here independently of the service (System.Security.Cryptography over the file bytes).
        string sha = Convert.ToHexStringLower(SHA256.HashData(File.ReadAllBytes(Path.Combine(s.ModelsRoot, Model, "model.onnx"))));
        string batchFolder = Path.Combine(s.DataRoot, "batches", "shift1-a");
        Assert.True(File.Exists(Path.Combine(batchFolder, "manifest.jsonl")));
        int regions = 0;
        foreach (var line in lines)
        {
            Assert.Equal(Model, line.GetProperty("model").GetString());
            Assert.Equal(sha, line.GetProperty("modelSha256").GetString());
            Assert.Equal("default", line.GetProperty("profileVersion").GetString());
            Assert.Equal("shift1/" + line.GetProperty("frameId").GetString(), line.GetProperty("source").GetString());
            var artifacts = line.GetProperty("artifacts");
            foreach (var link in artifacts.EnumerateObject())
                Assert.True(File.Exists(Path.Combine(batchFolder, link.Value.GetString()!)), link.Name);
            var report = JsonDocument.Parse(File.ReadAllText(Path.Combine(batchFolder, artifacts.GetProperty("report").GetString()!))).RootElement;
            Assert.Equal(line.GetProperty("frameScore").GetSingle(), report.GetProperty("frameScore").GetSingle());
            Assert.Equal(report.GetProperty("regions").GetArrayLength(), line.GetProperty("regions").GetArrayLength());
            foreach (var region in line.GetProperty("regions").EnumerateArray())
            {
                regions++;
                var box = region.GetProperty("box");
                int x0 = box.GetProperty("x").GetInt32(), y0 = box.GetProperty("y").GetInt32();
                int x1 = x0 + box.GetProperty("width").GetInt32(), y1 = y0 + box.GetProperty("height").GetInt32();
                var outline = region.GetProperty("outline");
                Assert.InRange(outline.GetArrayLength(), 1, 64);
                foreach (var p in outline.EnumerateArray())
                {
                    Assert.InRange(p[0].GetInt32(), x0, x1 - 1);
                    Assert.InRange(p[1].GetInt32(), y0, y1 - 1);
                }
                // One vocabulary with the frame report: classBeneath is the class index, classBeneathName its name.
                var same = report.GetProperty("regions").EnumerateArray().Single(r => r.GetProperty("id").GetInt32() == region.GetProperty("id").GetInt32());
                Assert.Equal(same.GetProperty("classBeneath").GetInt32(), region.GetProperty("classBeneath").GetInt32());
                Assert.Equal(same.GetProperty("classBeneathName").GetString(), region.GetProperty("classBeneathName").GetString());
                Assert.False(string.IsNullOrEmpty(region.GetProperty("classBeneathName").GetString()));
                Assert.True(region.GetProperty("maxScore").GetSingle() >= region.GetProperty("meanScore").GetSingle());
            }
        }
        Assert.True(regions > 0, "debris frames should yield at least one region");
    }

    [Fact]
    public async Task Resubmitting_a_batch_id_scores_only_frames_it_lacks()
    {
        await using var s = await TestService.StartAsync(m => { CopyDemoModel(m); CopyDemoModel(m, "demo-b"); }, Config());
        string folder = Path.Combine(s.DataRoot, "again");
        WriteFrames(folder, 3, debris: 1);
        await PostFolderAsync(s.Client, "again", batchId: "again-1");
        await WaitForStateAsync(s.Client, "again-1", "done");
        var before = await FramesAsync(s.Client, "again-1");

        var same = await PostFolderAsync(s.Client, "again", batchId: "again-1", expected: HttpStatusCode.OK);
        Assert.False(same.GetProperty("created").GetBoolean());
        Assert.Equal(0, same.GetProperty("framesAdded").GetInt32());
        Assert.Equal("done", same.GetProperty("batch").GetProperty("state").GetString());

        WriteFrames(folder, 1, seed: 99, prefix: "late_");
        var more = await PostFolderAsync(s.Client, "again", batchId: "again-1", expected: HttpStatusCode.OK);
        Assert.Equal(1, more.GetProperty("framesAdded").GetInt32());
        await WaitAsync(s.Client, "again-1", b => b.GetProperty("state").GetString() == "done" && b.GetProperty("frames").GetProperty("done").GetInt32() == 4);

        var after = await FramesAsync(s.Client, "again-1");
        Assert.Equal(4, after.Count);
        foreach (var (id, f) in before)
        {
            Assert.Equal(f.GetProperty("scoredAt").GetString(), after[id].GetProperty("scoredAt").GetString());
            Assert.Equal(1, after[id].GetProperty("attempts").GetInt32());
        }
        Assert.Equal(4, (await ManifestAsync(s.Client, "again-1")).Count);

        // Another model under the same id is a conflict, not a silent merge.
        var r = await s.Client.PostAsJsonAsync("/v1/batches", new { model = "demo-b", folder = "again", batchId = "again-1" });
        await TestService.ProblemAsync(r, 409, "batch-conflict");
    }

    [Fact]
    public async Task Cancel_stops_a_running_batch_and_leaves_the_rest_pending()
    {
        await using var s = await StartAsync(pause: TimeSpan.FromMilliseconds(300));
        WriteFrames(Path.Combine(s.DataRoot, "slow"), 6);
        await PostFolderAsync(s.Client, "slow", batchId: "slow-1");
        await WaitAsync(s.Client, "slow-1", b => b.GetProperty("frames").GetProperty("done").GetInt32() >= 1);
        var r = await s.Client.PostAsync("/v1/batches/slow-1/cancel", null);
        Assert.Equal(HttpStatusCode.OK, r.StatusCode);
        Assert.Equal("cancelled", JsonDocument.Parse(await r.Content.ReadAsStringAsync()).RootElement.GetProperty("state").GetString());

        await Task.Delay(800); // more than two frames' worth of pause: nothing may move now
        var b1 = await GetAsync(s.Client, "/v1/batches/slow-1");
        await Task.Delay(700);
        var b2 = await GetAsync(s.Client, "/v1/batches/slow-1");
        Assert.Equal("cancelled", b2.GetProperty("state").GetString());
        Assert.Equal(b1.GetProperty("frames").GetProperty("done").GetInt32(), b2.GetProperty("frames").GetProperty("done").GetInt32());
        Assert.True(b2.GetProperty("frames").GetProperty("pending").GetInt32() > 0);
        Assert.Equal(b2.GetProperty("frames").GetProperty("done").GetInt32(), (await ManifestAsync(s.Client, "slow-1")).Count);

        Assert.Equal(HttpStatusCode.OK, (await s.Client.PostAsync("/v1/batches/slow-1/cancel", null)).StatusCode); // again: same answer

        WriteFrames(Path.Combine(s.DataRoot, "quick"), 1);
        await PostFolderAsync(s.Client, "quick", batchId: "quick-1");
        await WaitForStateAsync(s.Client, "quick-1", "done");
        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/batches/quick-1/cancel", null), 409, "batch-conflict");

        var list = await GetAsync(s.Client, "/v1/batches");
        Assert.Equal(["quick-1", "slow-1"], list.GetProperty("batches").EnumerateArray().Select(b => b.GetProperty("id").GetString()!).ToArray());
    }

    [Fact]
    public async Task An_unreadable_frame_is_marked_failed_and_listed_last_while_the_batch_completes()
    {
        await using var s = await StartAsync();
        string folder = Path.Combine(s.DataRoot, "mixed");
        WriteFrames(folder, 2);
        File.WriteAllText(Path.Combine(folder, "broken.png"), "not a png");
        await PostFolderAsync(s.Client, "mixed", batchId: "mixed-1");
        var b = await WaitForStateAsync(s.Client, "mixed-1", "done");
        Assert.Equal(2, b.GetProperty("frames").GetProperty("done").GetInt32());
        Assert.Equal(1, b.GetProperty("frames").GetProperty("failed").GetInt32());
        var lines = await ManifestAsync(s.Client, "mixed-1");
        Assert.Equal(3, lines.Count);
        Assert.Equal("broken.png", lines[^1].GetProperty("frameId").GetString());
        Assert.StartsWith("frame-", lines[^1].GetProperty("error").GetString());
        Assert.False(lines[^1].TryGetProperty("artifacts", out _));
    }

    [Fact]
    public async Task Unknown_batch_is_404_batch_not_found_everywhere()
    {
        await using var s = await StartAsync();
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/batches/nope"), 404, "batch-not-found");
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/batches/nope/manifest"), 404, "batch-not-found");
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/batches/nope/frames"), 404, "batch-not-found");
        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/batches/nope/cancel", null), 404, "batch-not-found");
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/batches/..%2F..%2Fetc"), 404, "batch-not-found");
    }

    [Fact]
    public async Task Folders_outside_the_data_folder_missing_or_empty_are_refused_with_stable_codes()
    {
        await using var s = await StartAsync();
        string outside = Path.Combine(s.Root, "outside");
        WriteFrames(outside, 1);
        async Task<JsonElement> Post(object body, int status, string code) =>
            await TestService.ProblemAsync(await s.Client.PostAsJsonAsync("/v1/batches", body), status, code);

        await Post(new { model = Model, folder = "../outside" }, 400, "path-outside-data");
        await Post(new { model = Model, folder = outside }, 400, "path-outside-data");
        Directory.CreateSymbolicLink(Path.Combine(s.DataRoot, "sneaky"), outside);
        await Post(new { model = Model, folder = "sneaky" }, 400, "path-outside-data");
        Directory.CreateDirectory(Path.Combine(s.DataRoot, "mixed"));
        File.CreateSymbolicLink(Path.Combine(s.DataRoot, "mixed", "linked.png"), Path.Combine(outside, "cam_00.png"));
        await Post(new { model = Model, folder = "mixed" }, 400, "path-outside-data");
        await Post(new { model = Model, folder = "missing" }, 404, "folder-not-found");
        Directory.CreateDirectory(Path.Combine(s.DataRoot, "empty"));
        await Post(new { model = Model, folder = "empty" }, 400, "batch-empty");
        await Post(new { model = "nope", folder = "empty" }, 404, "model-not-found");
        await Post(new { model = Model, folder = "empty", batchId = "../x" }, 400, "validation-failed");
        await Post(new { model = Model, folder = "empty", callbackUrl = "http://127.0.0.1:9/hook" }, 400, "callback-not-allowed");
        var list = await GetAsync(s.Client, "/v1/batches");
        Assert.Equal(0, list.GetProperty("batches").GetArrayLength());
    }
}
