using System.Net;
using System.Net.Http.Json;
using System.Text.Json;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Calibration;
using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Api;

public class CalibrationsApiTests
{
    private static async Task WaitReady(TestService s)
    {
        var until = DateTime.UtcNow.AddSeconds(60);
        while ((await s.Client.GetAsync("/readyz")).StatusCode != HttpStatusCode.OK)
        {
            Assert.True(DateTime.UtcNow < until, "service never became ready");
            await Task.Delay(100);
        }
    }

    private static async Task<JsonElement> WaitState(TestService s, string id, params string[] states)
    {
        var until = DateTime.UtcNow.AddSeconds(90);
        while (true)
        {
            var job = await s.Client.GetFromJsonAsync<JsonElement>($"/v1/calibrations/{id}");
            if (states.Contains(job.GetProperty("state").GetString())) return job;
            Assert.True(DateTime.UtcNow < until, $"job stuck in {job}");
            await Task.Delay(100);
        }
    }

    [Fact]
    public async Task A_calibration_runs_over_a_data_folder_and_activation_makes_it_the_models_own()
    {
        await using var s = await TestService.StartAsync(models => BundledDemo.Extract(Path.Combine(models, "demo"), Path.Combine(models, "..", "demo-frames")));
        await WaitReady(s);
        string frames = Path.Combine(s.DataRoot, "ordinary");
        Directory.CreateDirectory(frames);
        foreach (string f in Directory.GetFiles(Path.Combine(s.Root, "demo-frames")).Where(f => !f.Contains("debris")))
            File.Copy(f, Path.Combine(frames, Path.GetFileName(f)));

        var start = await s.Client.PostAsJsonAsync("/v1/models/demo/calibrations", new { folder = "ordinary" });
        Assert.Equal(HttpStatusCode.Accepted, start.StatusCode);
        string id = (await start.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("id").GetString()!;
        var done = await WaitState(s, id, "done", "failed");
        Assert.Equal("done", done.GetProperty("state").GetString());
        Assert.Equal(done.GetProperty("framesTotal").GetInt32(), done.GetProperty("framesDone").GetInt32());

        var activated = await s.Client.PostAsync($"/v1/calibrations/{id}/activate", null);
        Assert.Equal(HttpStatusCode.OK, activated.StatusCode);
        var artifact = CalibrationArtifact.Load(Path.Combine(s.ModelsRoot, "demo", CalibrationArtifact.FileName));
        Assert.Equal(6, artifact.Classes.Count);
        Assert.Equal(done.GetProperty("framesTotal").GetInt32(), artifact.FrameCount);
        var details = await s.Client.GetFromJsonAsync<JsonElement>("/v1/models/demo");
        Assert.Contains("calibration.json", details.ToString());
    }

    [Fact]
    public async Task A_calibration_can_start_from_an_uploaded_zip_and_an_escaping_entry_is_refused()
    {
        await using var s = await TestService.StartAsync(models => BundledDemo.Extract(Path.Combine(models, "demo"), Path.Combine(models, "..", "demo-frames")));
        await WaitReady(s);
        var zip = new MemoryStream();
        using (var archive = new System.IO.Compression.ZipArchive(zip, System.IO.Compression.ZipArchiveMode.Create, leaveOpen: true))
            foreach (string f in Directory.GetFiles(Path.Combine(s.Root, "demo-frames")).Where(f => !f.Contains("debris")))
                System.IO.Compression.ZipFileExtensions.CreateEntryFromFile(archive, f, "site-a/" + Path.GetFileName(f));
        var start = await s.Client.PostAsync("/v1/models/demo/calibrations", Upload(zip.ToArray(), "frames.zip"));
        Assert.Equal(HttpStatusCode.Accepted, start.StatusCode);
        string id = (await start.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("id").GetString()!;
        var done = await WaitState(s, id, "done", "failed");
        Assert.Equal("done", done.GetProperty("state").GetString());
        Assert.Equal(2, done.GetProperty("framesTotal").GetInt32());

        var evil = new MemoryStream();
        using (var archive = new System.IO.Compression.ZipArchive(evil, System.IO.Compression.ZipArchiveMode.Create, leaveOpen: true))
            archive.CreateEntry("../escape.png").Open().Dispose();
        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/models/demo/calibrations", Upload(evil.ToArray(), "evil.zip")), 400, "archive-escape");
    }

    [Fact]
    public async Task Job_files_of_an_earlier_version_are_imported_into_the_store_and_stay_readable()
    {
        // Written as a build before the store held jobs left them: one job.json per job folder.
        const string calibration = "0f0e0d0c0b0a09080706050403020100", evaluation = "00112233445566778899aabbccddeeff";
        await using var s = await TestService.StartAsync(models =>
        {
            TestService.WriteModel(models, "apron-a");
            string jobs = Path.Combine(models, "..", "data", ".strayspot");
            Directory.CreateDirectory(Path.Combine(jobs, "calibrations", calibration));
            File.WriteAllText(Path.Combine(jobs, "calibrations", calibration, "job.json"), $$"""
                { "id": "{{calibration}}", "model": "apron-a", "modelSha256": "abc", "folder": "ordinary", "state": "done",
                  "framesDone": 4, "framesTotal": 4, "createdUtc": "2026-11-30T08:00:00+00:00", "finishedUtc": "2026-11-30T08:01:00+00:00" }
                """);
            Directory.CreateDirectory(Path.Combine(jobs, "evaluations", evaluation));
            File.WriteAllText(Path.Combine(jobs, "evaluations", evaluation, "job.json"), $$"""
                { "id": "{{evaluation}}", "model": "apron-a", "dataset": "labelled", "state": "failed", "error": "no labels",
                  "createdUtc": "2026-11-30T09:00:00+00:00" }
                """);
        });
        await WaitReady(s);
        var job = await WaitState(s, calibration, "done");
        Assert.Equal((4, "ordinary"), (job.GetProperty("framesDone").GetInt32(), job.GetProperty("folder").GetString()));
        var evaluations = await s.Client.GetFromJsonAsync<JsonElement>("/v1/evaluations");
        var only = Assert.Single(evaluations.EnumerateArray());
        Assert.Equal((evaluation, "failed", "no labels"),
            (only.GetProperty("id").GetString(), only.GetProperty("state").GetString(), only.GetProperty("error").GetString()));
        // The files are kept (renamed): the store is now where the jobs live.
        string folder = Path.Combine(s.DataRoot, ".strayspot", "calibrations", calibration);
        Assert.False(File.Exists(Path.Combine(folder, "job.json")));
        Assert.True(File.Exists(Path.Combine(folder, "job.json.imported")));
    }

    private static MultipartFormDataContent Upload(byte[] bytes, string name)
    {
        var form = new MultipartFormDataContent();
        var part = new ByteArrayContent(bytes);
        part.Headers.ContentType = new("application/zip");
        form.Add(part, "file", name);
        return form;
    }

    [Theory]
    [InlineData("../outside", "path-outside-data", 400)]
    [InlineData("missing", "folder-not-found", 404)] // a missing folder is not a frame format problem
    public async Task Folders_outside_the_data_root_or_missing_are_refused(string folder, string code, int status)
    {
        await using var s = await TestService.StartAsync(models => TestService.WriteModel(models, "apron-a"));
        var r = await s.Client.PostAsJsonAsync("/v1/models/apron-a/calibrations", new { folder });
        await TestService.ProblemAsync(r, status, code);
    }

    [Fact]
    public async Task Unknown_job_and_unknown_model_are_404_problems()
    {
        await using var s = await TestService.StartAsync(models => TestService.WriteModel(models, "apron-a"));
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/calibrations/nope"), 404, "job-not-found");
        await TestService.ProblemAsync(await s.Client.PostAsync("/v1/calibrations/nope/activate", null), 404, "job-not-found");
        await TestService.ProblemAsync(await s.Client.PostAsJsonAsync("/v1/models/none/calibrations", new { folder = "x" }), 404, "model-not-found");
        await TestService.ProblemAsync(await s.Client.PostAsJsonAsync("/v1/models/apron-a/calibrations", new { folder = "" }), 400, "validation-failed");
    }
}
