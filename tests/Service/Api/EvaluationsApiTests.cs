using System.Net;
using System.Net.Http.Json;
using System.Text.Json;
using Strayspot.Tests.Service.Evaluation;

namespace Strayspot.Tests.Service.Api;

public class EvaluationsApiTests
{
    [Fact]
    public async Task An_evaluation_runs_as_a_job_and_serves_its_tables_and_plots()
    {
        await using var s = await TestService.StartAsync(models => EvaluationFixtures.CopyDemoModel(Path.Combine(models, "demo")));
        EvaluationFixtures.WriteFlatDataset(Path.Combine(s.DataRoot, "labeled"), frames: 3);

        var start = await s.Client.PostAsJsonAsync("/v1/models/demo/evaluations", new { dataset = "labeled", exact = true });
        Assert.Equal(HttpStatusCode.Accepted, start.StatusCode);
        string id = (await start.Content.ReadFromJsonAsync<JsonElement>()).GetProperty("id").GetString()!;

        JsonElement job;
        var until = DateTime.UtcNow.AddSeconds(120);
        do
        {
            await Task.Delay(100);
            job = await s.Client.GetFromJsonAsync<JsonElement>($"/v1/evaluations/{id}");
            Assert.True(DateTime.UtcNow < until, $"stuck: {job}");
        } while (job.GetProperty("state").GetString() is "queued" or "running");

        Assert.Equal("done", job.GetProperty("state").GetString());
        Assert.Equal(3, job.GetProperty("framesDone").GetInt32());
        var metrics = await s.Client.GetFromJsonAsync<JsonElement>($"/v1/evaluations/{id}/files/metrics.json");
        Assert.Contains("sml", metrics.ToString());
        var roc = await s.Client.GetAsync($"/v1/evaluations/{id}/files/roc.png");
        Assert.Equal("image/png", roc.Content.Headers.ContentType?.MediaType);
        await TestService.ProblemAsync(await s.Client.GetAsync($"/v1/evaluations/{id}/files/secrets.txt"), 404, "not-found");
    }

    [Fact]
    public async Task Bad_datasets_and_unknown_jobs_are_problems_with_their_codes()
    {
        await using var s = await TestService.StartAsync(models => TestService.WriteModel(models, "apron-a"));
        await TestService.ProblemAsync(await s.Client.PostAsJsonAsync("/v1/models/apron-a/evaluations", new { dataset = "none" }), 404, "dataset-missing");
        await TestService.ProblemAsync(await s.Client.PostAsJsonAsync("/v1/models/apron-a/evaluations", new { dataset = "../up" }), 400, "path-outside-data");
        Directory.CreateDirectory(Path.Combine(s.DataRoot, "empty"));
        await TestService.ProblemAsync(await s.Client.PostAsJsonAsync("/v1/models/apron-a/evaluations", new { dataset = "empty" }), 400, "dataset-empty");
        await TestService.ProblemAsync(await s.Client.PostAsJsonAsync("/v1/models/apron-a/evaluations", new { dataset = "" }), 400, "validation-failed");
        await TestService.ProblemAsync(await s.Client.GetAsync("/v1/evaluations/nope"), 404, "job-not-found");
    }
}
