using System.CommandLine;
using Microsoft.Extensions.Options;
using Strayspot.Service.Hosting;

namespace Strayspot.Service.Cli;

/// <summary><c>strayspot serve</c>: runs the HTTP service until stopped (Ctrl+C or SIGTERM).</summary>
public static class ServeVerb
{
    public static Command Create()
    {
        var models = new Option<DirectoryInfo?>("--models")
        {
            Description = "Folder with one subfolder per model (descriptor.json, model.onnx, statistics, profile). Default: Service:ModelsRoot.",
        };
        var data = new Option<DirectoryInfo?>("--data")
        {
            Description = "Folder the service reads and writes (artifacts, batches). Default: Service:DataRoot.",
        };
        var urls = new Option<string[]>("--urls")
        {
            Description = "Listen addresses, e.g. http://127.0.0.1:8080. Anything beyond loopback needs Service:ApiKeys.",
            AllowMultipleArgumentsPerToken = true,
        };

        var command = new Command("serve", "Run the HTTP scoring service (loopback only unless told otherwise).");
        command.Options.Add(models);
        command.Options.Add(data);
        command.Options.Add(urls);
        command.SetAction(async (parse, ct) =>
        {
            var error = parse.InvocationConfiguration.Error;
            string[]? listen = parse.GetValue(urls) is { Length: > 0 } u ? u : null;
            var settings = new ServiceHostSettings
            {
                ModelsRoot = parse.GetValue(models)?.FullName,
                DataRoot = parse.GetValue(data)?.FullName,
                Urls = listen,
            };
            return await RunAsync(settings, error, ct);
        });
        return command;
    }

    /// <summary>0 after a clean stop, 2 when the configuration is refused, 1 when the server fails.</summary>
    public static async Task<int> RunAsync(ServiceHostSettings settings, TextWriter error, CancellationToken ct)
    {
        try
        {
            await using var app = ServiceHost.Build(settings);
            // Started, then checked against the addresses Kestrel really bound, before anything is served for long.
            await ServiceHost.StartCheckedAsync(app, ct);
            await app.WaitForShutdownAsync(ct);
            return 0;
        }
        catch (OptionsValidationException e)
        {
            await error.WriteLineAsync("strayspot serve: the configuration is refused:");
            foreach (string failure in e.Failures) await error.WriteLineAsync("  - " + failure);
            return 2;
        }
        catch (OperationCanceledException) when (ct.IsCancellationRequested)
        {
            return 0;
        }
        catch (IOException e)
        {
            // Kestrel reports a taken port this way.
            await error.WriteLineAsync($"strayspot serve: cannot listen: {e.Message}");
            return 1;
        }
    }
}
