using System.Runtime.CompilerServices;
using System.Text;
using Microsoft.Playwright;
using Xunit.Abstractions;

namespace Strayspot.Tests.Support;

/// <summary>Where the browser tests find Chromium, how they start it and where they leave their screenshots.</summary>
public static class BrowserSetup
{
    public const string DefaultExecutable = "/usr/bin/chromium";
    public const string ExecutableVariable = "STRAYSPOT_CHROMIUM";
    public const string ArtifactsVariable = "STRAYSPOT_TEST_ARTIFACTS";

    /// <summary>
    /// Chromium's own background traffic (updates, sync, field trials, QUIC probes) is refused by the closed network
    /// here and only slows the start down. No sandbox: the tests run as root, where Chromium refuses to start
    /// sandboxed. /dev/shm is small in many containers; Chromium then crashes on shared memory, so it uses /tmp.
    /// </summary>
    public static readonly IReadOnlyList<string> Arguments =
    [
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--disable-dev-shm-usage",
    ];

    public static string ExecutablePath =>
        Environment.GetEnvironmentVariable(ExecutableVariable) is { Length: > 0 } path ? path : DefaultExecutable;

    /// <summary>Null when the browser tests can run, otherwise what to do about it.</summary>
    public static string? SkipReason => SkipReasonFor(ExecutablePath);

    public static string? SkipReasonFor(string executable) =>
        File.Exists(executable)
            ? null
            : $"Chromium not found at {executable}; install Debian's chromium package (apt-get install chromium) " +
              $"to run the browser tests (or point {ExecutableVariable} at a Chromium executable)";

    /// <summary>Screenshots go here: kept after the run so a person can look at what the test saw.</summary>
    public static string ArtifactsFolder =>
        Path.Combine(
            Environment.GetEnvironmentVariable(ArtifactsVariable) is { Length: > 0 } root
                ? root
                : Path.Combine(AppContext.BaseDirectory, "TestResults"),
            "browser");
}

/// <summary>
/// A test that drives Chromium. Skipped, with the reason shown, when Chromium is not installed: xunit 2 has no skip
/// decided inside a running test, so the check happens when the test is discovered.
/// </summary>
public sealed class BrowserFactAttribute : FactAttribute
{
    public BrowserFactAttribute()
    {
        if (BrowserSetup.SkipReason is { } reason) Skip = reason;
    }
}

[CollectionDefinition(Name)]
public sealed class BrowserCollection : ICollectionFixture<BrowserFixture>
{
    public const string Name = "Browser";
}

/// <summary>
/// One Playwright driver and one Chromium for all the tests of the <see cref="BrowserCollection"/>; each test
/// opens its own <see cref="BrowserSession"/> (a fresh context: no cookies, storage or cache shared between tests).
/// </summary>
/// <remarks>Tests of one collection run one after another, so the browser never serves two tests at once.</remarks>
public sealed class BrowserFixture : IAsyncLifetime
{
    private IPlaywright? _playwright;
    private IBrowser? _browser;

    /// <summary>How long the driver and Chromium took to start, for tests that report their own cost.</summary>
    public TimeSpan StartTime { get; private set; }

    public async Task InitializeAsync()
    {
        // Every test in the collection is skipped then; a launch here would only turn the skips into failures.
        if (BrowserSetup.SkipReason is not null) return;
        // Playwright's 5 s wait for an expected DOM state is too short on a loaded 2-core CI machine.
        Assertions.SetDefaultExpectTimeout(15_000);
        var clock = System.Diagnostics.Stopwatch.StartNew();
        _playwright = await Playwright.CreateAsync();
        try
        {
            _browser = await _playwright.Chromium.LaunchAsync(new BrowserTypeLaunchOptions
            {
                ExecutablePath = BrowserSetup.ExecutablePath,
                Headless = true,
                Args = BrowserSetup.Arguments,
            });
        }
        catch
        {
            _playwright.Dispose();
            _playwright = null;
            throw;
        }
        StartTime = clock.Elapsed;
    }

    /// <summary>A fresh context and page for one test; dispose it at the end of the test.</summary>
    /// <param name="output">Receives what the page reported (console errors, failed requests) when the session closes.</param>
    /// <param name="testName">Names the screenshots; the calling test method unless given.</param>
    public async Task<BrowserSession> OpenAsync(ITestOutputHelper? output = null,
        [CallerMemberName] string testName = "", [CallerFilePath] string callerFile = "")
    {
        if (_browser is null)
            throw new InvalidOperationException(BrowserSetup.SkipReason ?? "the browser fixture was not initialised");
        var context = await _browser.NewContextAsync(new BrowserNewContextOptions
        {
            ViewportSize = new ViewportSize { Width = 1280, Height = 800 },
            // Screenshots and layout stay the same from machine to machine.
            Locale = "en-GB",
            TimezoneId = "UTC",
            DeviceScaleFactor = 1,
        });
        try
        {
            string name = Path.GetFileNameWithoutExtension(callerFile) is { Length: > 0 } cls ? $"{cls}.{testName}" : testName;
            var session = new BrowserSession(context, output, name);
            await session.OpenPageAsync();
            return session;
        }
        catch
        {
            await context.CloseAsync();
            throw;
        }
    }

    public async Task DisposeAsync()
    {
        if (_browser is not null) await _browser.CloseAsync();
        _playwright?.Dispose();
        _browser = null;
        _playwright = null;
    }
}

/// <summary>One test's browser context and page, with what went wrong in the page recorded as it happens.</summary>
public sealed class BrowserSession : IAsyncDisposable
{
    private readonly ITestOutputHelper? _output;
    private readonly string _testName;
    private readonly object _gate = new();
    private readonly List<string> _consoleErrors = [];
    private readonly List<string> _failedRequests = [];
    private int _screenshots;

    internal BrowserSession(IBrowserContext context, ITestOutputHelper? output, string testName)
    {
        Context = context;
        _output = output;
        _testName = testName;
        // On the context rather than the page, so popups and later pages are watched too.
        context.Console += (_, message) =>
        {
            if (message.Type == "error") Record(_consoleErrors, $"console: {message.Text} ({message.Location})");
        };
        context.WebError += (_, error) => Record(_consoleErrors, $"uncaught: {error.Error}");
        context.RequestFailed += (_, request) =>
            Record(_failedRequests, $"{request.Method} {request.Url}: {request.Failure ?? "failed"}");
        context.Response += (_, response) =>
        {
            if (response.Status >= 400)
                Record(_failedRequests, $"{response.Request.Method} {response.Url}: HTTP {response.Status}");
        };
    }

    public IBrowserContext Context { get; }
    public IPage Page { get; private set; } = null!;

    /// <summary>Console messages of level error and uncaught exceptions, in order.</summary>
    public IReadOnlyList<string> ConsoleErrors { get { lock (_gate) return [.. _consoleErrors]; } }

    /// <summary>Requests that got no response, and responses with a 4xx or 5xx status.</summary>
    public IReadOnlyList<string> FailedRequests { get { lock (_gate) return [.. _failedRequests]; } }

    internal async Task OpenPageAsync() => Page = await Context.NewPageAsync();

    /// <summary>Saves the page as a PNG named after the test and the step and returns its path.</summary>
    /// <remarks>The files are for people to look at; a test asserts on the DOM, never on these pixels.</remarks>
    public async Task<string> ScreenshotAsync(string step, bool fullPage = true)
    {
        Directory.CreateDirectory(BrowserSetup.ArtifactsFolder);
        int n = Interlocked.Increment(ref _screenshots);
        string path = Path.Combine(BrowserSetup.ArtifactsFolder, $"{SafeName(_testName)}-{n:D2}-{SafeName(step)}.png");
        await Page.ScreenshotAsync(new PageScreenshotOptions { Path = path, FullPage = fullPage });
        _output?.WriteLine($"screenshot: {path}");
        return path;
    }

    public void AssertNoConsoleErrors()
    {
        var errors = ConsoleErrors;
        Assert.True(errors.Count == 0, $"the page reported {errors.Count} error(s):\n{string.Join('\n', errors)}");
    }

    public void AssertNoFailedRequests()
    {
        var failed = FailedRequests;
        Assert.True(failed.Count == 0, $"{failed.Count} request(s) failed:\n{string.Join('\n', failed)}");
    }

    public async ValueTask DisposeAsync()
    {
        // xunit shows a test's output when it fails: this is where a failing browser test explains itself.
        if (_output is not null)
        {
            foreach (string line in ConsoleErrors) _output.WriteLine(line);
            foreach (string line in FailedRequests) _output.WriteLine("request: " + line);
        }
        await Context.CloseAsync();
    }

    private void Record(List<string> list, string line)
    {
        lock (_gate) list.Add(line);
    }

    private static string SafeName(string text)
    {
        var sb = new StringBuilder(text.Length);
        foreach (char c in text) sb.Append(char.IsAsciiLetterOrDigit(c) || c is '.' or '-' or '_' ? c : '_');
        return sb.Length == 0 ? "page" : sb.ToString();
    }
}
