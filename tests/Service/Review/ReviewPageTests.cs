using System.Net.Http.Json;
using System.Text.Json;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Playwright;
using Strayspot.Service.Demo;
using Strayspot.Service.Hosting;
using Strayspot.Tests.Support;
using Xunit.Abstractions;
using static Microsoft.Playwright.Assertions;

namespace Strayspot.Tests.Service.Review;

/// <summary>
/// The review page in headless Chromium against the real service on 127.0.0.1, with the bundled demo model and its
/// frames as a batch. Assertions are on the DOM and the API, never on pixels; screenshots are kept for people.
/// </summary>
[Collection(BrowserCollection.Name)]
public sealed class ReviewPageTests(BrowserFixture browser, ITestOutputHelper output)
{
    internal const string Batch = "apron-demo";

    /// <summary>The service on a real socket, with the demo model and a done batch of the demo frames.</summary>
    public sealed class LiveService : IAsyncDisposable
    {
        public required WebApplication App { get; init; }
        public required string Root { get; init; }
        public required HttpClient Http { get; init; }
        public required string BaseUrl { get; init; }
        public required IReadOnlyList<string> FramePaths { get; init; }

        public string PageUrl => BaseUrl + "/review/#batch=" + Batch;

        public async ValueTask DisposeAsync()
        {
            Http.Dispose();
            await App.StopAsync();
            await App.DisposeAsync();
            try { Directory.Delete(Root, recursive: true); } catch (IOException) { }
        }
    }

    internal static async Task<LiveService> StartAsync(string? apiKey = null, TimeSpan? pause = null, bool waitForDone = true)
    {
        string root = Directory.CreateTempSubdirectory("strayspot-review-").FullName;
        var (_, frames) = BundledDemo.Extract(Path.Combine(root, "models", "demo"), Path.Combine(root, "data", "apron"));
        var config = Batches.BatchTestKit.Config(pause);
        if (apiKey is not null)
        {
            config["Service:ApiKeys:0:Name"] = "reviewer-key";
            config["Service:ApiKeys:0:Sha256"] = ApiKeyHash.HexOf(apiKey);
        }
        var app = ServiceHost.Build(new ServiceHostSettings
        {
            ModelsRoot = Path.Combine(root, "models"),
            DataRoot = Path.Combine(root, "data"),
            Urls = ["http://127.0.0.1:0"],
            ConsoleLog = false,
            Configuration = config,
        });
        await app.StartAsync();
        string address = app.Services.GetRequiredService<IServer>().Features.Get<IServerAddressesFeature>()!.Addresses.First();
        var http = new HttpClient { BaseAddress = new Uri(address), Timeout = TimeSpan.FromSeconds(60) };
        if (apiKey is not null) http.DefaultRequestHeaders.Add("X-Api-Key", apiKey);
        var live = new LiveService { App = app, Root = root, Http = http, BaseUrl = address.TrimEnd('/'), FramePaths = frames };
        var submit = await http.PostAsJsonAsync("/v1/batches", new { model = "demo", folder = "apron", batchId = Batch, artifacts = "mask,overlay,heat" });
        Assert.True(submit.IsSuccessStatusCode, await submit.Content.ReadAsStringAsync());
        if (waitForDone) await Batches.BatchTestKit.WaitForStateAsync(http, Batch, "done", TimeSpan.FromSeconds(90));
        return live;
    }

    internal static async Task<JsonElement> OverviewAsync(HttpClient http) =>
        JsonDocument.Parse(await http.GetStringAsync($"/v1/batches/{Batch}/review")).RootElement;

    /// <summary>A frame's region ids in the page's work order: highest score first, ties by id.</summary>
    internal static async Task<List<int>> RegionOrderAsync(HttpClient http, int seq)
    {
        var frame = JsonDocument.Parse(await http.GetStringAsync($"/v1/batches/{Batch}/frames/{seq}")).RootElement;
        return frame.GetProperty("regions").EnumerateArray()
            .OrderByDescending(r => r.GetProperty("maxScore").GetSingle()).ThenBy(r => r.GetProperty("id").GetInt32())
            .Select(r => r.GetProperty("id").GetInt32()).ToList();
    }

    internal static async Task OpenPageAsync(IPage page, LiveService s)
    {
        await page.GotoAsync(s.PageUrl);
        await Expect(page.Locator("body")).ToHaveAttributeAsync("data-ready", "true");
        await Expect(page.Locator("#frame-title")).ToContainTextAsync("1 of ");
    }

    [BrowserFact]
    public async Task Verdict_keys_pressed_faster_than_they_are_saved_land_on_successive_regions()
    {
        await using var s = await StartAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        int seq = (await OverviewAsync(s.Http)).GetProperty("frames")[0].GetProperty("seq").GetInt32();
        var order = await RegionOrderAsync(s.Http, seq);
        Assert.True(order.Count >= 4, "the top demo frame should have several regions");
        await page.Keyboard.PressAsync("u");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {order[0]}");
        // Three verdicts typed at once: each belongs to the region the page moves on to after the one before.
        await page.Keyboard.PressAsync("1");
        await page.Keyboard.PressAsync("2");
        await page.Keyboard.PressAsync("3");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {order[3]}");
        await Expect(page.Locator("#frame-progress")).ToContainTextAsync($"3 of {order.Count} regions decided");
        var regions = JsonDocument.Parse(await s.Http.GetStringAsync($"/v1/batches/{Batch}/frames/{seq}")).RootElement.GetProperty("regions")
            .EnumerateArray().ToDictionary(r => r.GetProperty("id").GetInt32(),
                r => r.TryGetProperty("decision", out var d) && d.ValueKind == JsonValueKind.Object ? d.GetProperty("verdict").GetString() : null);
        Assert.Equal(["label-it", "false-alarm", "unsure", null], order.Take(4).Select(id => regions[id]));
        // Unsure's amber is a near shade of the selection's yellow: the two must differ in the line itself (its dashes).
        async Task<string> Dashes(int id) => await page.Locator($"#layer-boxes rect.box[data-region='{id}']")
            .EvaluateAsync<string>("b => getComputedStyle(b).strokeDasharray");
        string unsure = await Dashes(order[2]), selected = await Dashes(order[3]), falseAlarm = await Dashes(order[1]);
        Assert.NotEqual(selected, unsure);
        Assert.NotEqual(falseAlarm, unsure);
        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
    }

    [BrowserFact]
    public async Task Keyboard_steps_through_ranked_frames_and_regions_and_the_heat_map_toggles_and_fades()
    {
        await using var s = await StartAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);

        // The list is the API's ranking: highest frame score first.
        var overview = await OverviewAsync(s.Http);
        var ranked = overview.GetProperty("frames").EnumerateArray().Select(f => f.GetProperty("frameId").GetString()!).ToList();
        Assert.Equal(s.FramePaths.Count, ranked.Count);
        var items = page.Locator("#frame-list li");
        await Expect(items).ToHaveCountAsync(ranked.Count);
        for (int i = 0; i < ranked.Count; i++) await Expect(items.Nth(i).Locator(".name")).ToHaveTextAsync(ranked[i]);
        await Expect(items.Nth(0)).ToHaveClassAsync(new System.Text.RegularExpressions.Regex(@"\bcurrent\b"));
        await Expect(page.Locator("#frame-title")).ToContainTextAsync(ranked[0]);
        await Expect(page.Locator("#provenance")).ToContainTextAsync("demo");
        await Expect(page.Locator("#provenance")).ToContainTextAsync(overview.GetProperty("provenance").GetProperty("profileVersion").GetString()!);
        await session.ScreenshotAsync("first frame");

        await page.Keyboard.PressAsync("j");
        await Expect(page.Locator("#frame-title")).ToContainTextAsync($"2 of {ranked.Count}: {ranked[1]}");
        await Expect(items.Nth(1)).ToHaveClassAsync(new System.Text.RegularExpressions.Regex(@"\bcurrent\b"));
        await page.Keyboard.PressAsync("ArrowDown");
        await Expect(page.Locator("#frame-title")).ToContainTextAsync($"3 of {ranked.Count}: {ranked[2]}");
        await page.Keyboard.PressAsync("k");
        await page.Keyboard.PressAsync("ArrowUp");
        await Expect(page.Locator("#frame-title")).ToContainTextAsync($"1 of {ranked.Count}: {ranked[0]}");

        // Regions: the table matches the frame's regions; n selects the next one and zooms to it, z zooms out.
        int regionCount = overview.GetProperty("frames")[0].GetProperty("regionCount").GetInt32();
        Assert.True(regionCount >= 2, "the top demo frame should have several regions");
        var order = await RegionOrderAsync(s.Http, overview.GetProperty("frames")[0].GetProperty("seq").GetInt32());
        await Expect(page.Locator("#region-table tbody tr")).ToHaveCountAsync(regionCount);
        await Expect(page.Locator("#layer-boxes rect.box")).ToHaveCountAsync(regionCount);
        // The table is the work order: highest score first, each row still showing the report's region id.
        var rows = page.Locator("#region-table tbody tr");
        for (int i = 0; i < regionCount; i++)
        {
            await Expect(rows.Nth(i)).ToHaveAttributeAsync("data-region", order[i].ToString());
            await Expect(rows.Nth(i).Locator("td").First).ToHaveTextAsync(order[i].ToString());
        }
        string whole = (await page.Locator("#stage").GetAttributeAsync("viewBox"))!;
        await page.Keyboard.PressAsync("n");
        await Expect(page.Locator("#region-table tr.selected")).ToHaveAttributeAsync("data-region", order[0].ToString());
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {order[0]}");
        await Expect(page.Locator("#stage")).ToHaveAttributeAsync("data-zoomed", "true");
        Assert.NotEqual(whole, await page.Locator("#stage").GetAttributeAsync("viewBox"));
        await page.Keyboard.PressAsync("n");
        await Expect(page.Locator("#region-table tr.selected")).ToHaveAttributeAsync("data-region", order[1].ToString());
        await session.ScreenshotAsync("zoomed on the second region");
        await page.Keyboard.PressAsync("z");
        await Expect(page.Locator("#stage")).ToHaveAttributeAsync("viewBox", whole);
        // Clicking a row in the list zooms to that region.
        await page.Locator($"#region-table tbody tr[data-region='{regionCount}']").ClickAsync();
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {regionCount}");
        await Expect(page.Locator("#stage")).ToHaveAttributeAsync("data-zoomed", "true");

        // Heat map: off at first (the outline comes first), h shows and hides it, the slider sets its opacity; o hides the outline.
        var heat = page.Locator("#layer-heat");
        await Expect(heat).ToBeHiddenAsync();
        await Expect(page.Locator("#heat-toggle")).Not.ToBeCheckedAsync();
        await Expect(page.Locator("#layer-outline")).ToBeVisibleAsync();
        await page.Keyboard.PressAsync("h");
        await Expect(heat).ToBeVisibleAsync();
        await Expect(heat).ToHaveAttributeAsync("opacity", "0.4");
        await session.ScreenshotAsync("heat map on");
        await page.Keyboard.PressAsync("h");
        await Expect(heat).ToBeHiddenAsync();
        await page.Keyboard.PressAsync("h");
        await Expect(heat).ToBeVisibleAsync();
        await page.Locator("#heat-opacity").FillAsync("20");
        await Expect(heat).ToHaveAttributeAsync("opacity", "0.2");
        await Expect(page.Locator("#layer-outline")).ToHaveAttributeAsync("data-edges", new System.Text.RegularExpressions.Regex("^[1-9][0-9]*$"));
        await page.Keyboard.PressAsync("o");
        await Expect(page.Locator("#layer-outline")).ToBeHiddenAsync();
        await session.ScreenshotAsync("faded heat map, outline off");

        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
    }

    [BrowserFact]
    public async Task Decisions_made_on_the_page_survive_a_reload_and_reach_the_manifest_and_the_summary()
    {
        await using var s = await StartAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        var top = (await OverviewAsync(s.Http)).GetProperty("frames")[0];
        int seq = top.GetProperty("seq").GetInt32();
        // Stay on this frame after the whole-frame verdict below: this test is about what is saved, not the queue.
        await page.Locator("#advance-toggle").UncheckAsync();

        // Region 1 by button with a note; region 2 by key; the whole frame by key after f.
        await page.Locator("#region-table tbody tr[data-region='1']").ClickAsync();
        await page.Locator("#note").FillAsync("strap lying on the stand");
        await page.Locator(".verdicts button[data-verdict='label-it']").ClickAsync();
        await Expect(page.Locator("#status")).ToContainTextAsync("Region 1: Label it (saved)");
        await page.Locator("#note").BlurAsync();
        await page.Locator("#region-table tbody tr[data-region='2']").ClickAsync();
        await page.Keyboard.PressAsync("2");
        await Expect(page.Locator("#status")).ToContainTextAsync("Region 2: False alarm (saved)");
        await page.Keyboard.PressAsync("f");
        await page.Keyboard.PressAsync("3");
        await Expect(page.Locator("#status")).ToContainTextAsync("Frame: Unsure (saved)");
        await Expect(page.Locator("#region-table tr[data-region='1'] td.decision")).ToHaveTextAsync("Label it");
        await Expect(page.Locator("#layer-boxes rect.box[data-region='2']")).ToHaveClassAsync(new System.Text.RegularExpressions.Regex(@"\bfalse-alarm\b"));
        await Expect(page.Locator("#summary-counts")).ToContainTextAsync("1 of 4 frames reviewed");
        await session.ScreenshotAsync("three decisions");

        await page.ReloadAsync();
        await Expect(page.Locator("body")).ToHaveAttributeAsync("data-ready", "true");
        await Expect(page.Locator("#region-table tr[data-region='1'] td.decision")).ToHaveTextAsync("Label it");
        await Expect(page.Locator("#region-table tr[data-region='2'] td.decision")).ToHaveTextAsync("False alarm");
        await Expect(page.Locator("#target-verdict")).ToContainTextAsync("Unsure");
        await page.Locator("#region-table tbody tr[data-region='1']").ClickAsync();
        await Expect(page.Locator("#note")).ToHaveValueAsync("strap lying on the stand");
        await Expect(page.Locator(".verdicts button[data-verdict='label-it']")).ToHaveClassAsync(new System.Text.RegularExpressions.Regex(@"\bchosen\b"));
        // The summary: the region on the class beneath region 2 counts one false alarm.
        var frame = JsonDocument.Parse(await s.Http.GetStringAsync($"/v1/batches/{Batch}/frames/{seq}")).RootElement;
        string beneath2 = frame.GetProperty("regions")[1].GetProperty("classBeneathName").GetString()!;
        await Expect(page.Locator($"#class-table tr[data-class='{beneath2}']")).ToBeVisibleAsync();
        await session.ScreenshotAsync("after reload");

        var lines = (await s.Http.GetStringAsync($"/v1/batches/{Batch}/manifest")).Split('\n', StringSplitOptions.RemoveEmptyEntries)
            .Select(l => JsonDocument.Parse(l).RootElement).ToList();
        var line = lines.Single(l => l.GetProperty("seq").GetInt32() == seq);
        Assert.Equal("unsure", line.GetProperty("decision").GetProperty("verdict").GetString());
        var regions = line.GetProperty("regions");
        Assert.Equal("label-it", regions[0].GetProperty("decision").GetProperty("verdict").GetString());
        Assert.Equal("strap lying on the stand", regions[0].GetProperty("decision").GetProperty("note").GetString());
        Assert.Equal("false-alarm", regions[1].GetProperty("decision").GetProperty("verdict").GetString());
        Assert.All(lines.Where(l => l.GetProperty("seq").GetInt32() != seq), l => Assert.False(l.TryGetProperty("decision", out _)));

        // Re-export from the page: a download holding the same decisions.
        var download = await page.RunAndWaitForDownloadAsync(() => page.Locator("#export").ClickAsync());
        string saved = Path.Combine(s.Root, "export.jsonl");
        await download.SaveAsAsync(saved);
        Assert.Contains("strap lying on the stand", await File.ReadAllTextAsync(saved));

        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
    }

    [BrowserFact]
    public async Task A_note_typed_before_a_verdict_waits_for_it_and_an_edited_note_is_saved_on_leaving_the_field()
    {
        await using var s = await StartAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        int seq = (await OverviewAsync(s.Http)).GetProperty("frames")[0].GetProperty("seq").GetInt32();

        await page.Locator("#region-table tbody tr[data-region='1']").ClickAsync();
        await page.Locator("#note").FillAsync("looks like a glove");
        await page.Locator("#region-table tbody tr[data-region='2']").ClickAsync();
        await Expect(page.Locator("#note")).ToHaveValueAsync("");
        await page.Locator("#region-table tbody tr[data-region='1']").ClickAsync();
        await Expect(page.Locator("#note")).ToHaveValueAsync("looks like a glove");
        await page.Locator(".verdicts button[data-verdict='unsure']").ClickAsync();
        await Expect(page.Locator("#status")).ToContainTextAsync("Region 1: Unsure (saved)");
        // The verdict moved the selection on to the next undecided region; go back to edit the note.
        await Expect(page.Locator("#target-title")).Not.ToHaveTextAsync("Region 1");
        await page.Locator("#region-table tbody tr[data-region='1']").ClickAsync();
        await Expect(page.Locator("#note")).ToHaveValueAsync("looks like a glove");

        await page.Locator("#note").FillAsync("a glove, dropped by ground crew");
        await page.Locator("#region-table tbody tr[data-region='2']").ClickAsync();
        await Expect(page.Locator("#status")).ToContainTextAsync("Region 1: Unsure (saved)");
        var until = DateTime.UtcNow.AddSeconds(15);
        string? note;
        do
        {
            var decisions = JsonDocument.Parse(await s.Http.GetStringAsync($"/v1/batches/{Batch}/decisions")).RootElement.GetProperty("decisions");
            note = decisions.EnumerateArray().Where(d => d.GetProperty("seq").GetInt32() == seq && d.GetProperty("region").ValueKind == JsonValueKind.Number
                && d.GetProperty("region").GetInt32() == 1).Select(d => d.GetProperty("note").GetString()).SingleOrDefault();
            if (note == "a glove, dropped by ground crew") break;
            await Task.Delay(100);
        } while (DateTime.UtcNow < until);
        Assert.Equal("a glove, dropped by ground crew", note);
        // Two writes on region 1, both in the log.
        var log = JsonDocument.Parse(await s.Http.GetStringAsync($"/v1/batches/{Batch}/decisions/log")).RootElement.GetProperty("entries");
        Assert.Equal(["looks like a glove", "a glove, dropped by ground crew"], log.EnumerateArray().Select(e => e.GetProperty("note").GetString()));
        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
    }

    [BrowserFact]
    public async Task A_dropped_frame_is_scored_on_the_spot_and_shown_without_decisions()
    {
        await using var s = await StartAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        string file = s.FramePaths.First(p => p.Contains("debris", StringComparison.Ordinal));
        await page.Locator("#drop-file").SetInputFilesAsync(file);
        await Expect(page.Locator("#frame-title")).ToContainTextAsync("Dropped frame " + Path.GetFileName(file));
        await Expect(page.Locator("#status")).ToContainTextAsync("Scored " + Path.GetFileName(file));
        Assert.True(await page.Locator("#region-table tbody tr").CountAsync() > 0);
        await Expect(page.Locator(".verdicts button[data-verdict='label-it']")).ToBeDisabledAsync();
        await Expect(page.Locator("#frame-list li.current")).ToHaveCountAsync(0);
        await session.ScreenshotAsync("dropped frame");
        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
    }

    [BrowserFact]
    public async Task With_api_keys_the_page_asks_for_one_and_then_shows_the_batch()
    {
        const string key = "review-page-test-key-0123456789";
        await using var s = await StartAsync(apiKey: key);
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await page.GotoAsync(s.PageUrl);
        await Expect(page.Locator("#key-form")).ToBeVisibleAsync();
        await Expect(page.Locator("#status")).ToContainTextAsync("API key");
        await session.ScreenshotAsync("asks for a key");
        await page.Locator("#key-input").FillAsync(key);
        await page.Locator("#key-form button[type='submit']").ClickAsync();
        await Expect(page.Locator("#key-form")).ToBeHiddenAsync();
        await Expect(page.Locator("#frame-list li")).ToHaveCountAsync(s.FramePaths.Count);
        await Expect(page.Locator("#frame-title")).ToContainTextAsync("1 of ");
        // Only the answers before the key was given were refused (Chromium also logs each refusal to the console).
        Assert.NotEmpty(session.FailedRequests);
        Assert.All(session.FailedRequests, r => Assert.Contains("HTTP 401", r));
        Assert.All(session.ConsoleErrors, e => Assert.Contains("401", e));
    }

    [BrowserFact]
    public async Task Refresh_brings_in_frames_scored_since_the_page_opened_and_keeps_the_open_frame()
    {
        await using var s = await StartAsync(pause: TimeSpan.FromMilliseconds(800), waitForDone: false);
        await Batches.BatchTestKit.WaitAsync(s.Http, Batch, b => b.GetProperty("frames").GetProperty("done").GetInt32() >= 1, TimeSpan.FromSeconds(60));
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        int before = await page.Locator("#frame-list li").CountAsync();
        string title = (await page.Locator("#frame-title").TextContentAsync())!;
        string open = title[(title.IndexOf(": ", StringComparison.Ordinal) + 2)..title.IndexOf(" · ", StringComparison.Ordinal)];
        await Batches.BatchTestKit.WaitForStateAsync(s.Http, Batch, "done", TimeSpan.FromSeconds(90));
        Assert.True(before < s.FramePaths.Count, $"the batch was already done when the page opened ({before} frames)");

        await page.Locator("#reload-batches").ClickAsync();
        await Expect(page.Locator("#status")).ToContainTextAsync($"Refreshed: {s.FramePaths.Count} scored frames");
        await Expect(page.Locator("#frame-list li")).ToHaveCountAsync(s.FramePaths.Count);
        await Expect(page.Locator("#frame-title")).ToContainTextAsync(open);
        await Expect(page.Locator("#frame-list li.current .name")).ToHaveTextAsync(open);
        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
    }

    /// <summary>
    /// Checked with axe-core (Deque.AxeCore.Playwright), a general-purpose checker of WCAG 2 success criteria and
    /// common practice: no violation of any impact on the page with a frame and a region open.
    /// </summary>
    [BrowserFact]
    public async Task The_page_passes_the_axe_accessibility_rules()
    {
        await using var s = await StartAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        await page.Keyboard.PressAsync("n");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync(new System.Text.RegularExpressions.Regex(@"^Region \d+$"));
        await page.Keyboard.PressAsync("h");
        await Expect(page.Locator("#layer-heat")).ToBeVisibleAsync();
        var result = await Deque.AxeCore.Playwright.PageExtensions.RunAxe(page);
        foreach (var v in result.Violations)
            output.WriteLine($"axe {v.Impact}: {v.Id}: {v.Help} ({v.Nodes.Length} element(s): {string.Join(" | ", v.Nodes.Take(3).Select(n => n.Html))})");
        Assert.True(result.Violations.Length == 0, string.Join("\n", result.Violations.Select(v => $"{v.Id} ({v.Impact}): {v.Help}")));
        Assert.True(result.Passes.Length > 10, "axe ran too few rules to mean anything");
    }
}
