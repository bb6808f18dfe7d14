using System.Text.RegularExpressions;
using Microsoft.Extensions.Options;

namespace Strayspot.Service.Hosting;

/// <summary>
/// Per-frame artifact folders under ArtifactsRoot/{frameId}/, served back by name for ArtifactRetention and then swept.
/// </summary>
public sealed partial class ArtifactStore
{
    /// <summary>Artifact name in links → file name on disk (the names the renderer writes).</summary>
    public static IReadOnlyDictionary<string, string> Files => Rendering.ArtifactWriter.Files;

    private readonly TimeProvider _time;
    private readonly ILogger<ArtifactStore> _log;

    public ArtifactStore(IOptions<ServiceOptions> options, TimeProvider time, ILogger<ArtifactStore> log)
    {
        Root = Path.GetFullPath(options.Value.ResolvedArtifactsRoot);
        Retention = options.Value.ArtifactRetention;
        _time = time;
        _log = log;
    }

    public string Root { get; }
    public TimeSpan Retention { get; }

    [GeneratedRegex("^[a-f0-9]{32}$")]
    private static partial Regex FrameIdPattern();

    public static bool IsFrameId(string id) => FrameIdPattern().IsMatch(id);

    public static string ContentType(string artifact) => artifact == "score" ? "application/octet-stream" : "image/png";

    public static string NewFrameId() => Guid.NewGuid().ToString("N");

    public (string FrameId, string Folder) CreateFrameFolder()
    {
        string id = NewFrameId();
        string folder = Path.Combine(Root, id);
        Directory.CreateDirectory(folder);
        return (id, folder);
    }

    /// <summary>The file of an artifact if the frame id and artifact name are well formed and the file still exists.</summary>
    public string? Find(string frameId, string artifact)
    {
        if (!IsFrameId(frameId) || !Files.TryGetValue(artifact, out string? file)) return null;
        string path = Path.Combine(Root, frameId, file);
        return File.Exists(path) ? path : null;
    }

    /// <summary>Deletes frame folders last written before now − retention; returns how many went.</summary>
    public int SweepOnce()
    {
        if (!Directory.Exists(Root)) return 0;
        DateTime cutoff = _time.GetUtcNow().UtcDateTime - Retention;
        int deleted = 0;
        foreach (var dir in new DirectoryInfo(Root).EnumerateDirectories())
        {
            if (!IsFrameId(dir.Name) || dir.LastWriteTimeUtc >= cutoff) continue;
            try
            {
                dir.Delete(recursive: true);
                deleted++;
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                _log.LogWarning("Could not delete expired artifacts {FrameId}: {Reason}", dir.Name, e.Message);
            }
        }
        if (deleted > 0) _log.LogInformation("Deleted {Count} expired artifact folders", deleted);
        return deleted;
    }
}

/// <summary>Runs the artifact sweep a few times per retention period.</summary>
public sealed class ArtifactSweeper(ArtifactStore store, TimeProvider time, ILogger<ArtifactSweeper> log) : BackgroundService
{
    protected override async Task ExecuteAsync(CancellationToken stoppingToken)
    {
        var period = TimeSpan.FromTicks(Math.Clamp(store.Retention.Ticks / 4, TimeSpan.FromSeconds(1).Ticks, TimeSpan.FromMinutes(5).Ticks));
        using var timer = new PeriodicTimer(period, time);
        try
        {
            do
            {
                try { store.SweepOnce(); }
                catch (Exception e) when (e is IOException or UnauthorizedAccessException)
                {
                    log.LogWarning("Artifact sweep failed: {Reason}", e.Message);
                }
            } while (await timer.WaitForNextTickAsync(stoppingToken));
        }
        catch (OperationCanceledException) { }
    }
}
