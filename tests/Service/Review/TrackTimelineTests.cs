using System.Globalization;
using System.Text.Json;
using System.Text.RegularExpressions;
using Microsoft.Playwright;
using Strayspot.Tests.Support;
using Xunit.Abstractions;
using static Microsoft.Playwright.Assertions;

namespace Strayspot.Tests.Service.Review;

/// <summary>A browser test that also needs ffmpeg to make its recording: skipped, with the reason, when either is missing.</summary>
public sealed class BrowserVideoFactAttribute : FactAttribute
{
    public BrowserVideoFactAttribute()
    {
        if ((BrowserSetup.SkipReason ?? VideoFiles.SkipReason) is { } reason) Skip = reason;
    }
}

/// <summary>
/// The review page's timeline strip for a recording, in headless Chromium against a real Kestrel on 127.0.0.1, with a
/// drive-by video made by ffmpeg in the test. Assertions are on the DOM and the API, never on pixels.
/// </summary>
[Collection(BrowserCollection.Name)]
public sealed class TrackTimelineTests(BrowserFixture browser, ITestOutputHelper output)
{
    [BrowserVideoFact]
    public async Task The_timeline_strip_shows_score_threshold_and_tracks_and_a_track_is_picked_and_decided_by_click_and_key()
    {
        await using var kit = await TrackReviewKit.StartAsync();
        var rec = await kit.RecordingAsync();
        var tracks = rec.GetProperty("tracks").EnumerateArray()
            .OrderBy(t => t.GetProperty("firstTime").GetDouble()).ThenBy(t => t.GetProperty("id").GetInt32()).ToList();
        Assert.True(tracks.Count >= 2, $"the drive-by should keep at least two tracks; it kept {tracks.Count}");
        int first = tracks[0].GetProperty("id").GetInt32(), second = tracks[1].GetProperty("id").GetInt32();

        await using var session = await browser.OpenAsync(output);
        var page = session.Page;
        await page.SetViewportSizeAsync(1280, 720);
        await page.GotoAsync(kit.PageUrl);
        await Expect(page.Locator("body")).ToHaveAttributeAsync("data-ready", "true");
        await Expect(page.Locator("#recording-view")).ToBeVisibleAsync();
        await Expect(page.Locator("#frame-title")).ToContainTextAsync(TrackReviewKit.Video + " · recording 0.00 s–1.60 s");
        await Expect(page.Locator(".stage-box")).ToBeHiddenAsync();

        // The strip: one point per scored frame, the threshold line with its value, one bar per kept track.
        var strip = page.Locator("#timeline");
        await Expect(strip).ToHaveAttributeAsync("data-points", rec.GetProperty("times").GetArrayLength().ToString(CultureInfo.InvariantCulture));
        await Expect(strip.Locator("polyline.score-line")).ToHaveCountAsync(1);
        await Expect(strip.Locator("line.threshold")).ToHaveCountAsync(1);
        await Expect(strip.Locator("text.threshold-label")).ToHaveTextAsync("threshold " + rec.GetProperty("threshold").GetSingle().ToString("F2", CultureInfo.InvariantCulture));
        await Expect(strip.Locator("rect.track-bar")).ToHaveCountAsync(tracks.Count);
        await Expect(page.Locator("#track-table tbody tr")).ToHaveCountAsync(tracks.Count);
        // Bars run from first to last sighting on the time axis: a longer span is a wider bar, and their order is time order.
        var boxes = new List<(int Id, float X, float W)>();
        foreach (var t in tracks)
        {
            int id = t.GetProperty("id").GetInt32();
            var b = (await strip.Locator($"rect.track-bar[data-track='{id}']").BoundingBoxAsync())!;
            boxes.Add((id, b.X, b.Width));
        }
        Assert.Equal(boxes.Select(b => b.X).Order(), boxes.Select(b => b.X));
        var longest = tracks.MaxBy(t => t.GetProperty("lastTime").GetDouble() - t.GetProperty("firstTime").GetDouble());
        Assert.Equal(boxes.Max(b => b.W), boxes.Single(b => b.Id == longest.GetProperty("id").GetInt32()).W);
        await session.ScreenshotAsync("recording opened", fullPage: false);

        // Clicking a bar shows the track's best frame with its overlay and its facts.
        await strip.Locator($"rect.track-bar[data-track='{first}']").ClickAsync();
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Track {first}");
        await Expect(page.Locator("#track-best")).ToHaveAttributeAsync("data-track", first.ToString(CultureInfo.InvariantCulture));
        Assert.True(await page.Locator("#track-best").EvaluateAsync<bool>("img => img.complete && img.naturalWidth > 0"), "the best frame should load");
        // The track's own box is marked on its best frame (the overlay numbers that frame's regions, not tracks).
        await Expect(page.Locator("#track-mark")).ToBeVisibleAsync();
        var facts = page.Locator("#track-facts");
        await Expect(facts).ToContainTextAsync("Frames seen" + tracks[0].GetProperty("framesSeen").GetInt32());
        await Expect(facts).ToContainTextAsync("Highest score" + tracks[0].GetProperty("maxScore").GetSingle().ToString("F2", CultureInfo.InvariantCulture));
        await Expect(facts).ToContainTextAsync("Mean score" + tracks[0].GetProperty("meanScore").GetSingle().ToString("F2", CultureInfo.InvariantCulture));
        await Expect(facts).ToContainTextAsync("Class beneath" + tracks[0].GetProperty("classBeneathName").GetString());
        await Expect(facts).ToContainTextAsync("First seen" + tracks[0].GetProperty("firstTime").GetDouble().ToString("F2", CultureInfo.InvariantCulture) + " s");
        await Expect(page.Locator("#track-table tr.selected")).ToHaveAttributeAsync("data-track", first.ToString(CultureInfo.InvariantCulture));

        // A verdict key decides the whole track: saved, drawn on its bar, in the manifest, and the page moves on.
        await page.Keyboard.PressAsync("1");
        await Expect(page.Locator("#status")).ToContainTextAsync($"Track {first}: Label it (saved).");
        await Expect(strip.Locator($"rect.track-bar[data-track='{first}']")).ToHaveClassAsync(new Regex(@"\blabel-it\b"));
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Track {second}");
        var mark = (await kit.VideoLineAsync()).GetProperty("regions").EnumerateArray()
            .Single(r => r.GetProperty("id").GetInt32() == first).GetProperty("decision");
        Assert.Equal(("label-it", first), (mark.GetProperty("verdict").GetString(), mark.GetProperty("track").GetInt32()));
        await Expect(page.Locator("#frame-progress")).ToHaveAttributeAsync("data-decided", "1");
        await Expect(page.Locator($"#frame-list li[data-seq='{kit.VideoSeq}'] .meta")).ToContainTextAsync($"recording · 1/{tracks.Count} tracks decided");
        // At a common laptop size the strip, the best frame and the verdict buttons are in view, and the page does not scroll as a whole.
        foreach (string id in new[] { "#timeline", "#track-best", ".verdicts" })
            await Expect(page.Locator(id)).ToBeInViewportAsync(new() { Ratio = 1 });
        Assert.True(await page.EvaluateAsync<bool>("() => document.documentElement.scrollHeight <= window.innerHeight"), "the page scrolls as a whole");
        await session.ScreenshotAsync("track decided", fullPage: false);

        // Keys like the rest of the page: b/n (and the arrows) step through tracks, f takes the whole recording, 2 on a track.
        await page.Keyboard.PressAsync("b");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Track {first}");
        await page.Keyboard.PressAsync("ArrowRight");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Track {second}");
        await page.Keyboard.PressAsync("2");
        await Expect(strip.Locator($"rect.track-bar[data-track='{second}']")).ToHaveClassAsync(new Regex(@"\bfalse-alarm\b"));
        await page.Keyboard.PressAsync("f");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync("Whole recording");
        await Expect(page.Locator("#track-best")).Not.ToHaveAttributeAsync("data-track", new Regex("."));
        // A bar takes the keyboard focus and Enter picks it.
        await strip.Locator($"rect.track-bar[data-track='{second}']").FocusAsync();
        await page.Keyboard.PressAsync("Enter");
        await Expect(page.Locator("#target-title")).ToHaveTextAsync($"Track {second}");

        // Reloaded, the page shows the stored decisions; a still frame of the same batch shows the frame view again.
        await page.ReloadAsync();
        await Expect(page.Locator("body")).ToHaveAttributeAsync("data-ready", "true");
        await Expect(strip.Locator($"rect.track-bar[data-track='{first}']")).ToHaveClassAsync(new Regex(@"\blabel-it\b"));
        await Expect(strip.Locator($"rect.track-bar[data-track='{second}']")).ToHaveClassAsync(new Regex(@"\bfalse-alarm\b"));
        await page.Locator($"#frame-list li[data-seq='{kit.StillSeq}']").ClickAsync();
        await Expect(page.Locator("#frame-title")).ToContainTextAsync(TrackReviewKit.Still);
        await Expect(page.Locator("#recording-view")).ToBeHiddenAsync();
        await Expect(page.Locator(".stage-box")).ToBeVisibleAsync();
        await page.Locator($"#frame-list li[data-seq='{kit.VideoSeq}']").ClickAsync();
        await Expect(page.Locator("#recording-view")).ToBeVisibleAsync();

        // axe-core (Deque.AxeCore.Playwright), a general checker of WCAG 2 criteria and common practice, with a track open.
        await page.Keyboard.PressAsync("n");
        await Expect(page.Locator("#track-best")).ToHaveAttributeAsync("data-track", first.ToString(CultureInfo.InvariantCulture));
        var axe = await Deque.AxeCore.Playwright.PageExtensions.RunAxe(page);
        foreach (var v in axe.Violations)
            output.WriteLine($"axe {v.Impact}: {v.Id}: {v.Help} ({string.Join(" | ", v.Nodes.Take(3).Select(n => n.Html))})");
        Assert.True(axe.Violations.Length == 0, string.Join("\n", axe.Violations.Select(v => $"{v.Id} ({v.Impact}): {v.Help}")));
        Assert.True(axe.Passes.Length > 10, "axe ran too few rules to mean anything");
        await session.ScreenshotAsync("track open", fullPage: false);
        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
    }
}
