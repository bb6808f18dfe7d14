using System.Diagnostics;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using Microsoft.AspNetCore.Http;
using Microsoft.AspNetCore.Http.Features;
using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Logging;
using Microsoft.Playwright;
using Strayspot.Tests.Support;
using Xunit.Abstractions;

namespace Strayspot.Tests.Service.Review;

/// <summary>
/// Proves the browser test setup end to end before the review page exists: a real Kestrel on 127.0.0.1, Debian's
/// Chromium driven through Playwright, clicks and keys that change the DOM, and the session's error capture.
/// </summary>
[Collection(BrowserCollection.Name)]
public sealed class BrowserSmokeTests(BrowserFixture browser, ITestOutputHelper output)
{
    // The click goes to the server and back, so the test sees Kestrel answer a request the page's script made.
    private const string CounterPage = """
        <!doctype html>
        <html lang="en"><head><meta charset="utf-8"><title>smoke</title><link rel="icon" href="data:,"></head>
        <body>
          <button id="bump" type="button">bump</button>
          <p id="count">count 0</p>
          <p id="keys">no keys yet</p>
          <script>
            let count = 0;
            const keys = [];
            document.getElementById('bump').addEventListener('click', async () => {
              const response = await fetch('/next?n=' + count);
              count = await response.json();
              document.getElementById('count').textContent = 'count ' + count;
            });
            document.addEventListener('keydown', e => {
              keys.push(e.key);
              document.getElementById('keys').textContent = 'keys ' + keys.join(',');
            });
          </script>
        </body></html>
        """;

    private const string FaultyPage = """
        <!doctype html>
        <html lang="en"><head><meta charset="utf-8"><title>faulty</title><link rel="icon" href="data:,"></head>
        <body>
          <p id="state">loading</p>
          <script>
            console.error('deliberate console error');
            fetch('/missing').then(() => { document.getElementById('state').textContent = 'fetched'; });
            setTimeout(() => { throw new Error('deliberate uncaught error'); }, 0);
          </script>
        </body></html>
        """;

    [BrowserFact]
    public async Task A_click_and_key_presses_change_the_page_served_by_kestrel()
    {
        var clock = Stopwatch.StartNew();
        await using var site = await LoopbackSite.StartAsync();
        await using var session = await browser.OpenAsync(output);
        var page = session.Page;

        await page.GotoAsync(site.Address);
        await Assertions.Expect(page.Locator("#count")).ToHaveTextAsync("count 0");
        await session.ScreenshotAsync("loaded");

        await page.Locator("#bump").ClickAsync();
        await Assertions.Expect(page.Locator("#count")).ToHaveTextAsync("count 1");
        await page.Locator("#bump").ClickAsync();
        await Assertions.Expect(page.Locator("#count")).ToHaveTextAsync("count 2");

        await page.Keyboard.PressAsync("ArrowRight");
        await page.Keyboard.PressAsync("Shift+KeyA");
        await Assertions.Expect(page.Locator("#keys")).ToHaveTextAsync("keys ArrowRight,Shift,A");

        string shot = await session.ScreenshotAsync("after input");
        Assert.True(new FileInfo(shot).Length > 0, shot);
        Assert.Equal(2, site.NextCalls);
        session.AssertNoConsoleErrors();
        session.AssertNoFailedRequests();
        output.WriteLine($"browser start {browser.StartTime.TotalMilliseconds:F0} ms (once per run), this test {clock.ElapsedMilliseconds} ms");
    }

    [BrowserFact]
    public async Task The_session_records_console_errors_uncaught_exceptions_and_failed_requests()
    {
        await using var site = await LoopbackSite.StartAsync();
        await using var session = await browser.OpenAsync(output);

        await session.Page.GotoAsync(site.Address + "faulty");
        await Assertions.Expect(session.Page.Locator("#state")).ToHaveTextAsync("fetched");
        // The uncaught error is thrown from a timer; wait until it has reached the session, not a fixed time.
        for (int i = 0; i < 100 && session.ConsoleErrors.Count < 2; i++) await Task.Delay(50);

        Assert.Contains(session.ConsoleErrors, e => e.Contains("deliberate console error"));
        Assert.Contains(session.ConsoleErrors, e => e.StartsWith("uncaught:") && e.Contains("deliberate uncaught error"));
        Assert.Contains(session.FailedRequests, r => r.Contains("/missing") && r.Contains("HTTP 404"));
        var thrown = Assert.ThrowsAny<Exception>(session.AssertNoConsoleErrors);
        Assert.Contains("deliberate console error", thrown.Message);
        Assert.ThrowsAny<Exception>(session.AssertNoFailedRequests);
    }

    [BrowserFact]
    public async Task Sessions_do_not_share_storage()
    {
        await using var site = await LoopbackSite.StartAsync();
        await using (var first = await browser.OpenAsync(output))
        {
            await first.Page.GotoAsync(site.Address);
            await first.Page.EvaluateAsync("() => localStorage.setItem('left', 'behind')");
        }
        await using var second = await browser.OpenAsync(output);
        await second.Page.GotoAsync(site.Address);
        Assert.Null(await second.Page.EvaluateAsync<string?>("() => localStorage.getItem('left')"));
    }

    [Fact]
    public void A_missing_chromium_gives_a_skip_reason_that_says_how_to_install_it()
    {
        string missing = Path.Combine(Path.GetTempPath(), "no-chromium-" + Guid.NewGuid().ToString("N"));
        string? reason = BrowserSetup.SkipReasonFor(missing);
        Assert.NotNull(reason);
        Assert.Contains(missing, reason);
        Assert.Contains("apt-get install chromium", reason);

        string present = Path.GetTempFileName();
        try { Assert.Null(BrowserSetup.SkipReasonFor(present)); }
        finally { File.Delete(present); }
    }

    /// <summary>A tiny real Kestrel on an ephemeral loopback port; the port is read back, not guessed.</summary>
    private sealed class LoopbackSite : IAsyncDisposable
    {
        private readonly WebApplication _app;
        private int _nextCalls;

        private LoopbackSite(WebApplication app) => _app = app;

        public string Address { get; private set; } = "";
        public int NextCalls => Volatile.Read(ref _nextCalls);

        public static async Task<LoopbackSite> StartAsync()
        {
            var builder = WebApplication.CreateBuilder(new WebApplicationOptions { ContentRootPath = AppContext.BaseDirectory });
            builder.Logging.ClearProviders();
            builder.WebHost.UseUrls("http://127.0.0.1:0");
            var app = builder.Build();
            var site = new LoopbackSite(app);
            app.MapGet("/", () => Results.Content(CounterPage, "text/html; charset=utf-8"));
            app.MapGet("/faulty", () => Results.Content(FaultyPage, "text/html; charset=utf-8"));
            app.MapGet("/next", (int n) =>
            {
                Interlocked.Increment(ref site._nextCalls);
                return n + 1;
            });
            await app.StartAsync();
            string address = app.Services.GetRequiredService<IServer>().Features
                .GetRequiredFeature<IServerAddressesFeature>().Addresses.Single();
            site.Address = address.TrimEnd('/') + "/";
            return site;
        }

        public async ValueTask DisposeAsync()
        {
            await _app.StopAsync();
            await _app.DisposeAsync();
        }
    }
}
