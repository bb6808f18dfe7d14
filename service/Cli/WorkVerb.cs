using System.CommandLine;
using Strayspot.Service.Batches;
using Strayspot.Service.Hosting;

namespace Strayspot.Service.Cli;

/// <summary>
/// <c>strayspot work</c>: a replica that only takes batch work from the store (no scoring API; health, readiness and
/// metrics are still served). With <c>--until-idle</c> it exits 0 once no batch is left anywhere, as a backfill
/// Job's pods should.
/// </summary>
public static class WorkVerb
{
    public static Command Create()
    {
        var models = new Option<DirectoryInfo?>("--models") { Description = "Folder with one subfolder per model. Default: Service:ModelsRoot." };
        var data = new Option<DirectoryInfo?>("--data") { Description = "Folder batches are read from and written to (shared by all replicas). Default: Service:DataRoot." };
        var urls = new Option<string[]>("--urls")
        {
            Description = "Where /healthz, /readyz and /metrics listen, e.g. http://127.0.0.1:8081.",
            AllowMultipleArgumentsPerToken = true,
        };
        var untilIdle = new Option<bool>("--until-idle") { Description = "Exit once no queued or running batch is left (Service:Batches:ExitWhenIdle)." };

        var command = new Command("work", "Take batch work only: score frames of queued and running batches, sharing them with other replicas through the store.");
        command.Options.Add(models);
        command.Options.Add(data);
        command.Options.Add(urls);
        command.Options.Add(untilIdle);
        command.SetAction(async (parse, ct) =>
        {
            var overrides = new Dictionary<string, string?> { [$"{BatchOptions.Section}:{nameof(BatchOptions.WorkerOnly)}"] = "true" };
            if (parse.GetValue(untilIdle)) overrides[$"{BatchOptions.Section}:{nameof(BatchOptions.ExitWhenIdle)}"] = "true";
            var settings = new ServiceHostSettings
            {
                ModelsRoot = parse.GetValue(models)?.FullName,
                DataRoot = parse.GetValue(data)?.FullName,
                Urls = parse.GetValue(urls) is { Length: > 0 } u ? u : null,
                Configuration = overrides,
            };
            return await ServeVerb.RunAsync(settings, parse.InvocationConfiguration.Error, ct);
        });
        return command;
    }
}
