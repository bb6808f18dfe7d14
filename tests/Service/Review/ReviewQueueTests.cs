using System.Text.Json;
using System.Text.RegularExpressions;
using Microsoft.Playwright;
using Strayspot.Service.Rendering;
using Strayspot.Service.Review;
using Strayspot.Tests.Support;
using Xunit.Abstractions;
using static Microsoft.Playwright.Assertions;
using static Strayspot.Tests.Service.Review.ReviewPageTests;

namespace Strayspot.Tests.Service.Review;

/// <summary>
/// The review page as a work queue, in headless Chromium against the real service with the demo batch: regions in
/// score order, a verdict moving on to the next undecided region and then the next frame that needs review, progress
/// per frame, tags that never overlap, and a layout that shows the legend and threshold without scrolling.
/// </summary>
[Collection(BrowserCollection.Name)]
public sealed class ReviewQueueTests(BrowserFixture browser, ReviewQueueTests.SharedService shared, ITestOutputHelper output)
    : IClassFixture<ReviewQueueTests.SharedService>
{
    /// <summary>
    /// One service and demo batch for the whole class, started on first use (so a run without Chromium starts none):
    /// the queue test's decisions change nothing the other tests look at.
    /// </summary>
    public sealed class SharedService : IAsyncLifetime
    {
        private readonly Lazy<Task<LiveService>> _live = new(() => StartAsync());

        public Task<LiveService> GetAsync() => _live.Value;

        public Task InitializeAsync() => Task.CompletedTask;

        public async Task DisposeAsync()
        {
            if (_live.IsValueCreated) await (await _live.Value).DisposeAsync();
        }
    }

    private static readonly Regex Current = new(@"\bcurrent\b");

    [BrowserFact]
    public async Task A_verdict_moves_to_the_next_undecided_region_and_then_to_the_next_frame_that_needs_review()
    {
        var s = await shared.GetAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        var frames = (await OverviewAsync(s.Http)).GetProperty("frames").EnumerateArray().ToList();
        int seq0 = frames[0].GetProperty("seq").GetInt32();
        var order = await RegionOrderAsync(s.Http, seq0);
        Assert.True(order.Count >= 3, "the top demo frame should have several regions");

        // u picks the highest-scoring undecided region; each verdict moves to the next one in score order.
        await page.Keyboard.PressAsync("u");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {order[0]}");
        await page.Keyboard.PressAsync("1");
        await Expect(page.Locator("#status")).ToContainTextAsync($"Region {order[0]}: Label it (saved)");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {order[1]}");
        await Expect(page.Locator("#frame-progress")).ToContainTextAsync($"1 of {order.Count} regions decided");
        // Partly decided: the frame is in progress, not reviewed, in the list and in the summary.
        var first = page.Locator($"#frame-list li[data-seq='{seq0}']");
        await Expect(first).ToHaveClassAsync(new Regex(@"\bpartial\b"));
        await Expect(first).Not.ToHaveClassAsync(new Regex(@"\breviewed\b"));
        await Expect(first.Locator(".meta")).ToContainTextAsync($"1/{order.Count} regions decided");
        await Expect(page.Locator("#summary-counts")).ToContainTextAsync("0 of 4 frames reviewed (1 more in progress)");
        await session.ScreenshotAsync("one region decided");
        await page.Keyboard.PressAsync("z");
        await Expect(page.Locator("#stage")).ToHaveAttributeAsync("data-zoomed", "false");
        await session.ScreenshotAsync("whole frame, one region decided", fullPage: false);

        // A region decided out of order is skipped by the queue.
        await page.Locator($"#region-table tbody tr[data-region='{order[2]}']").ClickAsync();
        await page.Keyboard.PressAsync("2");
        await Expect(page.Locator("#status")).ToContainTextAsync($"Region {order[2]}: False alarm (saved)");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {order[3 % order.Count]}");
        await page.Locator($"#region-table tbody tr[data-region='{order[1]}']").ClickAsync();
        for (int i = 1; i < order.Count; i++)
        {
            if (i == 2) continue;
            await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {order[i]}");
            await page.Keyboard.PressAsync("2");
            await Expect(page.Locator("#status")).ToContainTextAsync($"Region {order[i]}: False alarm (saved)");
        }

        // The last verdict of the frame opens the next frame that needs review, on its highest-scoring region.
        int seq1 = frames[1].GetProperty("seq").GetInt32();
        var order1 = await RegionOrderAsync(s.Http, seq1);
        await Expect(page.Locator("#frame-list li").Nth(1)).ToHaveClassAsync(Current);
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Region {order1[0]}");
        await Expect(first).ToHaveClassAsync(new Regex(@"\breviewed\b"));
        await Expect(page.Locator("#summary-counts")).ToContainTextAsync("1 of 4 frames reviewed");
        await session.ScreenshotAsync("next frame after the last region");

        // A whole-frame verdict reviews the frame and moves on to the next frame that needs it.
        await page.Keyboard.PressAsync("f");
        await page.Keyboard.PressAsync("2");
        await Expect(page.Locator("#status")).ToContainTextAsync("Frame: False alarm (saved)");
        await Expect(page.Locator("#frame-list li").Nth(2)).ToHaveClassAsync(Current);
        await Expect(page.Locator("#frame-list li").Nth(1)).ToHaveClassAsync(new Regex(@"\breviewed\b"));
        await Expect(page.Locator("#summary-counts")).ToContainTextAsync("2 of 4 frames reviewed");

        // Shift+U skips to the next frame that still needs review without deciding anything.
        await page.Keyboard.PressAsync("Shift+U");
        await Expect(page.Locator("#frame-list li").Nth(3)).ToHaveClassAsync(Current);
        await page.Keyboard.PressAsync("Shift+U");
        await Expect(page.Locator("#frame-list li").Nth(2)).ToHaveClassAsync(Current);

        var counts = (await OverviewAsync(s.Http)).GetProperty("counts").GetProperty("frames");
        Assert.Equal(2, counts.GetProperty("reviewed").GetInt32());
        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
    }

    [BrowserFact]
    public async Task Region_numbers_never_overlap_on_any_demo_frame_whole_or_zoomed()
    {
        var s = await shared.GetAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        var frames = (await OverviewAsync(s.Http)).GetProperty("frames").EnumerateArray().ToList();
        int busiest = frames.Select((f, i) => (f.GetProperty("regionCount").GetInt32(), i)).Max().i;
        for (int i = 0; i < frames.Count; i++)
        {
            if (i > 0) await page.Keyboard.PressAsync("j");
            await Expect(page.Locator("#frame-title")).ToContainTextAsync($"{i + 1} of {frames.Count}");
            int count = frames[i].GetProperty("regionCount").GetInt32();
            await Expect(page.Locator("#layer-boxes rect.box")).ToHaveCountAsync(count);
            await Expect(page.Locator("#layer-boxes rect.tag-bg")).ToHaveCountAsync(count);
            await AssertTagsApartAsync(page, frames[i].GetProperty("frameId").GetString()!);
            if (i == busiest)
            {
                await session.ScreenshotAsync("busiest frame");
                await page.Keyboard.PressAsync("n");
                await Expect(page.Locator("#stage")).ToHaveAttributeAsync("data-zoomed", "true");
                await AssertTagsApartAsync(page, "zoomed");
                await page.Keyboard.PressAsync("z");
            }
        }
        session.AssertNoConsoleErrors();
    }

    private static async Task AssertTagsApartAsync(IPage page, string what)
    {
        // Screen rectangles of the number tags (only those in view); any two that intersect make numbers unreadable.
        var boxes = await page.EvaluateAsync<double[][]>("""
            () => {
              const stage = document.getElementById('stage').getBoundingClientRect();
              return [...document.querySelectorAll('#layer-boxes rect.tag-bg')].map(e => e.getBoundingClientRect())
                .filter(r => r.right > stage.left && r.left < stage.right && r.bottom > stage.top && r.top < stage.bottom)
                .map(r => [r.left, r.top, r.right, r.bottom]);
            }
            """);
        Assert.NotEmpty(boxes);
        for (int a = 0; a < boxes.Length; a++)
        for (int b = a + 1; b < boxes.Length; b++)
        {
            var p = boxes[a];
            var q = boxes[b];
            bool overlap = p[0] < q[2] - 0.5 && q[0] < p[2] - 0.5 && p[1] < q[3] - 0.5 && q[1] < p[3] - 0.5;
            Assert.False(overlap, $"{what}: tags {a} and {b} overlap ({string.Join(",", p)} / {string.Join(",", q)})");
        }
    }

    [BrowserFact]
    public async Task At_common_laptop_sizes_the_legend_and_threshold_show_without_scrolling_and_no_space_is_left_empty()
    {
        var s = await shared.GetAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        foreach (var (width, height) in new[] { (1280, 720), (1600, 1000) })
        {
            await page.SetViewportSizeAsync(width, height);
            await OpenPageAsync(page, s);
            await AssertLayoutAsync(s, session, width, height);
        }
        session.AssertNoConsoleErrors();
    }

    private static async Task AssertLayoutAsync(LiveService s, BrowserSession session, int width, int height)
    {
        var page = session.Page;
        var frame = JsonDocument.Parse(await s.Http.GetStringAsync(
            $"/v1/batches/{Batch}/frames/{(await OverviewAsync(s.Http)).GetProperty("frames")[0].GetProperty("seq").GetInt32()}")).RootElement;
        var scale = frame.GetProperty("heatScale");
        float threshold = scale.GetProperty("threshold").GetSingle();
        Assert.Equal(frame.GetProperty("threshold").GetSingle(), threshold);
        Assert.Equal("fixed", scale.GetProperty("mode").GetString());

        await Expect(page.Locator("#heat-threshold")).ToHaveTextAsync("threshold " + threshold.ToString("F2", System.Globalization.CultureInfo.InvariantCulture));
        await Expect(page.Locator("#heat-legend")).ToHaveAttributeAsync("data-mode", "fixed");
        foreach (string id in new[] { "#heat-legend", "#heat-marker", "#class-legend", "#stage", ".verdicts", "#summary-counts" })
            await Expect(page.Locator(id)).ToBeInViewportAsync(new() { Ratio = 1 });
        // The marker sits where the threshold falls on the bar: two thirds along on the fixed scale.
        var m = await page.EvaluateAsync<double[]>("""
            () => {
              const bar = document.querySelector('.hl-bar').getBoundingClientRect();
              const mk = document.getElementById('heat-marker').getBoundingClientRect();
              const box = document.querySelector('.region-box').getBoundingClientRect();
              const center = document.querySelector('.center').getBoundingClientRect();
              return [(mk.left + mk.width / 2 - bar.left) / bar.width, document.documentElement.scrollHeight, window.innerHeight,
                      box.bottom, center.bottom, document.querySelector('.stage-box').getBoundingClientRect().height];
            }
            """);
        Assert.InRange(m[0], 0.64, 0.69);
        Assert.True(m[1] <= m[2], $"the page scrolls: {m[1]} px of content in a {m[2]} px window");
        // No dead space: the region list reaches the bottom of the centre column, and the frame takes a fair share of the height.
        Assert.True(m[4] - m[3] < 16, $"{m[4] - m[3]:F0} px left empty under the region list");
        Assert.True(m[5] > 0.4 * height, $"the frame is only {m[5]:F0} px tall in a {height} px window");
        await AssertRightColumnFitsAsync(page, $"{width}×{height}");
        await session.ScreenshotAsync($"{width}x{height}", fullPage: false);
    }

    /// <summary>Nothing in the decisions column runs past its right edge: the tally table fits its box, which shows no cue.</summary>
    private static async Task AssertRightColumnFitsAsync(IPage page, string what)
    {
        await Expect(page.Locator("#class-table tbody tr").First).ToBeVisibleAsync();
        var f = await page.EvaluateAsync<double[]>("""
            () => {
              const right = document.querySelector('.right'), box = document.getElementById('class-scroll');
              const table = document.getElementById('class-table').getBoundingClientRect();
              return [right.scrollWidth, right.clientWidth, box.scrollWidth, box.clientWidth, table.right, right.getBoundingClientRect().right];
            }
            """);
        Assert.True(f[0] <= f[1], $"{what}: the decisions column is {f[0]} px wide inside {f[1]} px");
        Assert.True(f[2] <= f[3], $"{what}: the false-alarm table is {f[2]} px wide in a {f[3]} px box");
        Assert.True(f[4] <= f[5], $"{what}: the false-alarm table ends at {f[4]:F0} px, past the column's edge at {f[5]:F0} px");
        await Expect(page.Locator(".right .scroll-cue")).ToHaveAttributeAsync("data-more", "");
        await Expect(page.Locator("#class-scroll")).Not.ToHaveAttributeAsync("tabindex", "0");
    }

    [BrowserFact]
    public async Task A_list_reached_with_the_keyboard_scrolls_with_the_arrows_and_after_a_click_the_arrows_step_frames()
    {
        var s = await shared.GetAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await page.SetViewportSizeAsync(1280, 720);
        await OpenPageAsync(page, s);
        var list = page.Locator(".region-box");
        await Expect(page.Locator("#region-table tbody tr").First).ToBeVisibleAsync();
        Assert.True(await list.EvaluateAsync<bool>("b => b.scrollHeight > b.clientHeight + 20"), "the top frame's region list should scroll at 1280×720");
        string title = await page.Locator("#frame-title").InnerTextAsync();

        // Tab into the region list: the arrows scroll it and the open frame stays.
        await page.Locator("#zoom-reset").FocusAsync();
        await page.Keyboard.PressAsync("Shift+Tab");
        await page.Keyboard.PressAsync("Tab");
        for (int i = 0; i < 12 && !await list.EvaluateAsync<bool>("b => b === document.activeElement"); i++) await page.Keyboard.PressAsync("Tab");
        await Expect(list).ToBeFocusedAsync();
        await page.Keyboard.PressAsync("ArrowDown");
        await page.Keyboard.PressAsync("PageDown");
        await Expect(page.Locator("#frame-title")).ToHaveTextAsync(title);
        // The browser scrolls a key press over a few frames: wait for it (up to 5 s) instead of reading it at once.
        bool scrolled = false;
        for (int i = 0; i < 50 && !scrolled; i++)
        {
            scrolled = await list.EvaluateAsync<double>("b => b.scrollTop") > 0;
            if (!scrolled) await Task.Delay(100);
        }
        Assert.True(scrolled, "the arrow keys did not scroll the focused region list");

        // A click on a row focuses the list too, but the arrows keep their page meaning: the next frame.
        await page.Locator("#region-table tbody tr").Nth(1).ClickAsync();
        await page.Keyboard.PressAsync("ArrowDown");
        await Expect(page.Locator("#frame-title")).ToContainTextAsync("2 of 4:");
        session.AssertNoConsoleErrors();
    }

    [BrowserFact]
    public async Task The_file_picker_for_a_dropped_frame_is_reached_and_opened_with_the_keyboard()
    {
        var s = await shared.GetAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await OpenPageAsync(page, s);
        await page.Locator("#reload-batches").FocusAsync();
        await page.Keyboard.PressAsync("Tab");
        await Expect(page.Locator("#drop-file")).ToBeFocusedAsync();
        Assert.Equal("solid", await page.Locator(".file-pick").EvaluateAsync<string>("l => getComputedStyle(l).outlineStyle"));
        // Under a loaded machine the first key press sometimes reached Chromium before the chooser's interception was
        // live (the wait timed out once in a full run, never alone): try the key a few times; never opening still fails.
        IFileChooser? chooser = null;
        for (int attempt = 0; chooser is null && attempt < 3; attempt++)
        {
            try
            {
                await Expect(page.Locator("#drop-file")).ToBeFocusedAsync();
                chooser = await page.RunAndWaitForFileChooserAsync(() => page.Keyboard.PressAsync("Space"),
                    new PageRunAndWaitForFileChooserOptions { Timeout = 8000 });
            }
            catch (TimeoutException) when (attempt < 2)
            {
                output.WriteLine($"attempt {attempt + 1}: no file chooser within 8 s; pressing Space again");
            }
        }
        Assert.NotNull(chooser);
        Assert.False(chooser.IsMultiple);
        session.AssertNoConsoleErrors();
    }

    [BrowserFact]
    public async Task In_a_small_window_the_frame_stays_above_the_legend_and_the_false_alarm_table_scrolls_inside_its_column_with_a_cue()
    {
        var s = await shared.GetAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await page.SetViewportSizeAsync(1024, 640);
        await OpenPageAsync(page, s);
        await AssertRightColumnFitsAsync(page, "1024×640");
        // In a short window the frame scales down inside its box: nothing of it runs under the legend.
        var v = await page.EvaluateAsync<double[]>("""
            () => [document.getElementById('stage').getBoundingClientRect().bottom, document.querySelector('.stage-box').getBoundingClientRect().bottom,
                   document.querySelector('.legend-row').getBoundingClientRect().top, document.getElementById('stage').getBoundingClientRect().height]
            """);
        Assert.True(v[0] <= v[1] + 0.5 && v[1] <= v[2] + 0.5, $"the frame ends at {v[0]:F0} px, its box at {v[1]:F0} px, the legend starts at {v[2]:F0} px");
        Assert.True(v[3] > 120, $"the frame is only {v[3]:F0} px tall");
        await session.ScreenshotAsync("1024x640", fullPage: false);

        // A model's own class name can be longer than the column: the table scrolls inside its box, not the column.
        await page.EvaluateAsync("""
            () => { document.querySelector('#class-table tbody td').textContent = 'container-dolly-with-a-very-long-class-name-from-a-users-model'; }
            """);
        var cue = page.Locator(".right .scroll-cue");
        await Expect(cue).ToHaveAttributeAsync("data-more", "right");
        var box = page.Locator("#class-scroll");
        await Expect(box).ToHaveAttributeAsync("tabindex", "0");
        var f = await page.EvaluateAsync<double[]>("() => { const r = document.querySelector('.right'); return [r.scrollWidth, r.clientWidth]; }");
        Assert.True(f[0] <= f[1], "the column itself must not scroll sideways");
        await session.ScreenshotAsync("long class name, more to the right", fullPage: false);
        // The keyboard reaches it and scrolls it: focus, then the arrow key, with nothing else taking the key.
        string frameBefore = await page.Locator("#frame-title").InnerTextAsync();
        await box.FocusAsync();
        await page.Keyboard.PressAsync("End");
        await page.Keyboard.PressAsync("ArrowRight");
        await Expect(cue).ToHaveAttributeAsync("data-more", new Regex(@"\bleft\b"));
        await box.EvaluateAsync("b => { b.scrollLeft = b.scrollWidth; }");
        await Expect(cue).ToHaveAttributeAsync("data-more", "left");
        Assert.Equal(frameBefore, await page.Locator("#frame-title").InnerTextAsync());
        await session.ScreenshotAsync("long class name, scrolled to the end", fullPage: false);
        session.AssertNoConsoleErrors();
    }

    [Fact]
    public void The_page_colour_bar_uses_the_heat_table_stops()
    {
        using var stream = typeof(ReviewPage).Assembly.GetManifestResourceStream("review/review.css")!;
        string css = new StreamReader(stream).ReadToEnd();
        string expected = "linear-gradient(to right, " + string.Join(", ", ColorScales.HeatStops(9)) + ")";
        Assert.Contains(expected, css);
    }
}
