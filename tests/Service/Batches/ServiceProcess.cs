using System.Collections.Concurrent;
using System.Diagnostics;

namespace Strayspot.Tests.Service.Batches;

/// <summary><c>dotnet strayspot.dll serve</c> (or another verb) from beside the tests, as its own process on a loopback port.</summary>
public sealed class ServiceProcess : IDisposable
{
    private readonly Process _process;
    private readonly ConcurrentQueue<string> _log = new();

    private ServiceProcess(Process process, int port, string verb)
    {
        _process = process;
        Port = port;
        Verb = verb;
        process.OutputDataReceived += (_, e) => { if (e.Data is not null) _log.Enqueue(e.Data); };
        process.ErrorDataReceived += (_, e) => { if (e.Data is not null) _log.Enqueue(e.Data); };
        process.BeginOutputReadLine();
        process.BeginErrorReadLine();
    }

    public int Port { get; }
    public string Verb { get; }
    public int Id => _process.Id;
    public bool HasExited => _process.HasExited;
    public int ExitCode => _process.ExitCode;
    public string Log => string.Join('\n', _log);

    /// <summary>Starts the verb with a 200 ms poll interval and one inference thread; <paramref name="environment"/> adds or overrides settings.</summary>
    public static ServiceProcess Start(string models, string data, int port, IReadOnlyDictionary<string, string>? environment = null, string verb = "serve",
        params string[] extraArgs)
    {
        string dll = Path.Combine(AppContext.BaseDirectory, "strayspot.dll");
        Assert.True(File.Exists(dll), $"{dll} is missing: the tests project references the service, which copies it here");
        var info = new ProcessStartInfo("dotnet") { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false };
        foreach (string a in new[] { dll, verb, "--models", models, "--data", data, "--urls", $"http://127.0.0.1:{port}" }.Concat(extraArgs))
            info.ArgumentList.Add(a);
        info.Environment["STRAYSPOT_Service__Batches__PollInterval"] = "00:00:00.200";
        info.Environment["STRAYSPOT_Service__IntraOpThreads"] = "1";
        foreach (var (k, v) in environment ?? new Dictionary<string, string>()) info.Environment[k] = v;
        return new ServiceProcess(Process.Start(info)!, port, verb);
    }

    public HttpClient Client() => new() { BaseAddress = new Uri($"http://127.0.0.1:{Port}"), Timeout = TimeSpan.FromSeconds(10) };

    public async Task<HttpClient> ReadyClientAsync(TimeSpan? timeout = null)
    {
        var client = Client();
        var deadline = DateTime.UtcNow + (timeout ?? TimeSpan.FromSeconds(60));
        while (DateTime.UtcNow < deadline)
        {
            if (_process.HasExited) break;
            try
            {
                var r = await client.GetAsync("/readyz");
                if (r.IsSuccessStatusCode) return client;
            }
            catch (HttpRequestException) { }
            catch (TaskCanceledException) { }
            await Task.Delay(100);
        }
        client.Dispose();
        Assert.Fail($"The server did not become ready (exited: {_process.HasExited}). Log:\n{Log}");
        return null!;
    }

    /// <summary>SIGSTOP or SIGCONT: freezes the process so what it holds can be read before it is killed.</summary>
    public void Signal(bool freeze)
    {
        using var kill = System.Diagnostics.Process.Start("kill", [freeze ? "-STOP" : "-CONT", _process.Id.ToString(System.Globalization.CultureInfo.InvariantCulture)]);
        kill.WaitForExit();
    }

    /// <summary>SIGKILL: no shutdown hooks, no flushing; exactly what a crash or an OOM kill does.</summary>
    public void Kill()
    {
        _process.Kill(entireProcessTree: true);
        _process.WaitForExit(10_000);
    }

    /// <summary>SIGTERM through the kill command, then wait for the graceful stop.</summary>
    public async Task StopAsync()
    {
        using (var term = Process.Start("kill", ["-TERM", _process.Id.ToString()])) await term.WaitForExitAsync();
        await WaitForExitAsync(TimeSpan.FromSeconds(15));
        Assert.True(_process.ExitCode == 0, $"exit code {_process.ExitCode}. Log:\n{Log}");
    }

    public async Task WaitForExitAsync(TimeSpan timeout)
    {
        using var cts = new CancellationTokenSource(timeout);
        await _process.WaitForExitAsync(cts.Token);
    }

    private bool _disposed;

    public void Dispose()
    {
        if (_disposed) return;
        _disposed = true;
        if (!_process.HasExited) Kill();
        _process.Dispose();
    }
}
