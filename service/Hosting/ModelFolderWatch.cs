using Microsoft.Extensions.Options;
using Strayspot.Service.Batches;

namespace Strayspot.Service.Hosting;

/// <summary>
/// With a shared store, replicas share the models folder too: a calibration activated or a profile written through
/// one replica must reach the others. Each replica looks at the folder every poll interval (names, sizes and write
/// times only: the model hashes are computed again only when something changed) and reloads its catalog and
/// sessions on a change. A single box reloads only when asked, as before.
/// </summary>
public sealed class ModelFolderWatch(ModelCatalog catalog, ModelSessions sessions, BatchService batches, IOptions<ServiceOptions> options,
    ILogger<ModelFolderWatch> log) : BackgroundService
{
    protected override async Task ExecuteAsync(CancellationToken stop)
    {
        if (!batches.Store.Shared) return;
        string root = Path.GetFullPath(options.Value.ModelsRoot);
        string seen = Fingerprint(root);
        using var timer = new PeriodicTimer(batches.Options.PollInterval);
        try
        {
            while (await timer.WaitForNextTickAsync(stop))
            {
                string now;
                try { now = Fingerprint(root); }
                catch (IOException) { continue; } // a folder went away while listed: look again next time
                if (now == seen) continue;
                seen = now;
                log.LogInformation("The models folder {ModelsRoot} changed; reloading the catalog", root);
                catalog.Reload();
                sessions.Sync();
            }
        }
        catch (OperationCanceledException) { }
    }

    /// <summary>Every file of every model folder: relative path, length and last write time.</summary>
    public static string Fingerprint(string root)
    {
        if (!Directory.Exists(root)) return "";
        var files = new DirectoryInfo(root).EnumerateFiles("*", new EnumerationOptions { RecurseSubdirectories = true, MaxRecursionDepth = 1 });
        var lines = new List<string>();
        foreach (var f in files) lines.Add($"{Path.GetRelativePath(root, f.FullName)}|{f.Length}|{f.LastWriteTimeUtc.Ticks}");
        lines.Sort(StringComparer.Ordinal);
        return string.Join('\n', lines);
    }
}
