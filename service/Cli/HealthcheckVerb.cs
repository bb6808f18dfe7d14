using System.CommandLine;
using Strayspot.Service.Hosting;

namespace Strayspot.Service.Cli;

/// <summary>
/// <c>strayspot healthcheck</c>: asks a running service on this machine whether it is alive. The container's
/// HEALTHCHECK runs it so the image needs no curl or wget.
/// </summary>
public static class HealthcheckVerb
{
    public const string DefaultUrl = ServiceHostSettings.DefaultUrl;

    public static Command Create()
    {
        var url = new Option<string>("--url")
        {
            Description = "Base address of the service (loopback only); /healthz is asked.",
            DefaultValueFactory = _ => DefaultUrl,
        };
        var ready = new Option<bool>("--ready")
        {
            Description = "Ask /readyz instead: succeed only when the models are loaded.",
        };
        var timeout = new Option<double>("--timeout")
        {
            Description = "Seconds to wait for the answer.",
            DefaultValueFactory = _ => 3,
        };
        var command = new Command("healthcheck", "Exit 0 when the local service answers its health endpoint with 200, else 1.");
        command.Options.Add(url);
        command.Options.Add(ready);
        command.Options.Add(timeout);
        command.SetAction((parse, ct) => CheckAsync(parse.GetValue(url)!, parse.GetValue(ready),
            TimeSpan.FromSeconds(parse.GetValue(timeout)), parse.InvocationConfiguration.Output, parse.InvocationConfiguration.Error, ct));
        return command;
    }

    public static async Task<int> CheckAsync(string baseUrl, bool ready, TimeSpan timeout, TextWriter output, TextWriter error, CancellationToken ct)
    {
        if (!Uri.TryCreate(baseUrl, UriKind.Absolute, out var uri) || uri.Scheme is not ("http" or "https"))
        {
            await error.WriteLineAsync($"healthcheck: '{baseUrl}' is not an http(s) address.");
            return 2;
        }
        if (!ListenAddresses.IsLoopback(baseUrl))
        {
            await error.WriteLineAsync($"healthcheck: '{baseUrl}' is not a loopback address; this check only asks the local service.");
            return 2;
        }
        if (timeout <= TimeSpan.Zero)
        {
            await error.WriteLineAsync($"healthcheck: --timeout must be positive; got {timeout.TotalSeconds}.");
            return 2;
        }
        var target = new Uri(uri, ready ? "/readyz" : "/healthz");
        using var http = new HttpClient { Timeout = timeout };
        try
        {
            using var response = await http.GetAsync(target, ct);
            if (response.IsSuccessStatusCode)
            {
                await output.WriteLineAsync($"healthy: {target} answered {(int)response.StatusCode}");
                return 0;
            }
            await error.WriteLineAsync($"unhealthy: {target} answered {(int)response.StatusCode}");
            return 1;
        }
        catch (Exception e) when (e is HttpRequestException or TaskCanceledException)
        {
            await error.WriteLineAsync($"unhealthy: {target} did not answer ({e.Message})");
            return 1;
        }
    }
}
