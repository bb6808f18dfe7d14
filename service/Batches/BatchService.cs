using System.Collections.Concurrent;
using System.Text.RegularExpressions;
using System.Threading.Channels;
using Microsoft.Extensions.Options;
using Strayspot.Service.Api;
using Strayspot.Service.Calibration;
using Strayspot.Service.Hosting;
using Strayspot.Service.Review;
using Strayspot.Service.Store;

namespace Strayspot.Service.Batches;

/// <summary>
/// Accepts batches (a folder under DataRoot or an uploaded archive), cancels them, and wakes the worker. Paths of
/// frames are stored relative to DataRoot, so a data folder moved as a whole keeps working.
/// </summary>
public sealed partial class BatchService : IDisposable
{
    public const string InputFolder = "input";
    public const string FramesFolder = "frames";

    private readonly BatchOptions _options;
    private readonly ModelCatalog _catalog;
    private readonly Channel<bool> _wake = Channel.CreateBounded<bool>(new BoundedChannelOptions(1) { FullMode = BoundedChannelFullMode.DropWrite });
    private readonly ConcurrentDictionary<string, CancellationTokenSource> _running = new(StringComparer.Ordinal);
    private readonly Lock _submit = new();

    public BatchService(IOptions<ServiceOptions> service, IOptions<BatchOptions> options, IOptions<StoreOptions> store, ModelCatalog catalog)
    {
        _options = options.Value;
        var problems = _options.Validate().Concat(store.Value.Validate()).ToList();
        if (problems.Count > 0) throw new OptionsValidationException(BatchOptions.Section, typeof(BatchOptions), problems);
        _catalog = catalog;
        DataRoot = Path.GetFullPath(service.Value.DataRoot);
        Root = _options.ResolveRoot(DataRoot);
        string database = store.Value.Store == BatchDatabase.Postgres ? "the PostgreSQL store (Service:StoreConnection)" : _options.ResolveDatabase(DataRoot);
        try
        {
            Directory.CreateDirectory(Root);
            Database = store.Value.Store == BatchDatabase.Postgres
                ? BatchDatabase.OpenPostgres(store.Value.StoreConnection!)
                : BatchDatabase.OpenSqlite(database);
        }
        catch (Exception e) when (e is Microsoft.Data.Sqlite.SqliteException or IOException or UnauthorizedAccessException
                                      or StoreUnavailableException or Npgsql.NpgsqlException or ArgumentException or InvalidOperationException)
        {
            // Refused like a bad setting: the serve verb prints it and exits, instead of a stack trace.
            throw new OptionsValidationException(BatchOptions.Section, typeof(BatchOptions),
                [$"The batch folder '{Root}' or {database} cannot be used (Service:Batches:Root, Service:Batches:DatabasePath, Service:Store): {e.Message}"]);
        }
    }

    /// <summary>The store of batches and decisions, SQLite or PostgreSQL (Service:Store).</summary>
    public BatchDatabase Database { get; }
    public IBatchStore Store => Database.Batches;
    public IDecisionStore Decisions => Database.Decisions;
    public BatchOptions Options => _options;
    public string DataRoot { get; }
    public string Root { get; }

    [GeneratedRegex("^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$")]
    private static partial Regex BatchIdPattern();

    public static bool IsBatchId(string id) => BatchIdPattern().IsMatch(id);

    public string BatchFolder(string id) => Path.Combine(Root, id);

    /// <summary>Rewrites the batch's manifest from the store (frames so far, with their decisions); returns its path.</summary>
    public string WriteManifest(BatchRecord batch) =>
        Manifest.Write(BatchFolder(batch.Id), batch, Store.Frames(batch.Id), Decisions.Effective(batch.Id));

    /// <summary>An absolute path for a stored source: relative ones are resolved under DataRoot (links checked again).</summary>
    public string ResolveSource(string source) => Path.IsPathRooted(source) ? source : SafePath.Resolve(DataRoot, source);

    /// <param name="artifacts">As <c>score --artifacts</c> takes it (<see cref="Rendering.ArtifactChoice"/>); null: the lean default for a new batch, the batch's own for an existing one.</param>
    public (BatchRecord Batch, bool Created, int Added) SubmitFolder(string model, string folder, string? batchId, string? callbackUrl,
        string? artifacts = null)
    {
        string id = CheckRequest(model, batchId, callbackUrl);
        var chosen = CheckArtifacts(artifacts);
        string full = SafePath.Resolve(DataRoot, folder);
        if (!Directory.Exists(full))
            throw new BatchException(ErrorCodes.FolderNotFound, $"There is no folder '{folder}' in the data folder.");
        string folderRel = Path.GetRelativePath(DataRoot, full).Replace('\\', '/');
        var frames = new List<NewFrame>();
        // Not a FolderFrameSource: a batch folder also contributes recordings (video files), one work item each.
        var walk = new EnumerationOptions { RecurseSubdirectories = true, IgnoreInaccessible = true, AttributesToSkip = FileAttributes.System };
        foreach (string file in Directory.EnumerateFiles(full, "*", walk))
        {
            string rel = Path.GetRelativePath(full, file).Replace('\\', '/');
            if (rel.Split('/').Any(p => p.StartsWith('.'))) continue;
            if (!BatchRecordings.IsInput(file)) continue;
            string source = folderRel == "." ? rel : folderRel + "/" + rel;
            SafePath.Resolve(DataRoot, source); // a linked file or folder may not lead out of the data folder
            frames.Add(new NewFrame(rel, source));
            if (frames.Count > _options.MaxFramesPerBatch)
                throw new BatchException(ErrorCodes.ValidationFailed,
                    $"The folder '{folder}' holds more than {_options.MaxFramesPerBatch} frames (Service:Batches:MaxFramesPerBatch); split it.");
        }
        if (frames.Count == 0)
            throw new BatchException(ErrorCodes.BatchEmpty, $"The folder '{folder}' holds no {BatchRecordings.Accepted} frames or recordings.");
        frames.Sort((a, b) => string.CompareOrdinal(a.FrameId, b.FrameId));
        EnsureModelCanScore(model);
        return Submit(id, model, "folder:" + folderRel, callbackUrl, frames, chosen);
    }

    /// <summary>Unpacks the archive into the batch's input folder; frames already in the batch keep their first file.</summary>
    public (BatchRecord Batch, bool Created, int Added) SubmitArchive(string model, string archivePath, string? fileName, string? batchId,
        string? callbackUrl, string? artifacts = null)
    {
        string id = CheckRequest(model, batchId, callbackUrl);
        var chosen = CheckArtifacts(artifacts);
        string staging = Path.Combine(Root, ".uploads", Guid.NewGuid().ToString("N"));
        try
        {
            var extracted = BatchArchive.Extract(archivePath, fileName, staging, new ArchiveLimits(_options.MaxArchiveEntries, _options.MaxArchiveBytes));
            if (extracted.Count == 0)
                throw new BatchException(ErrorCodes.BatchEmpty, $"The archive holds no {BatchRecordings.Accepted} frames or recordings.");
            if (extracted.Count > _options.MaxFramesPerBatch)
                throw new BatchException(ErrorCodes.ValidationFailed,
                    $"The archive holds {extracted.Count} frames; at most {_options.MaxFramesPerBatch} are accepted (Service:Batches:MaxFramesPerBatch).");
            extracted.Sort(StringComparer.Ordinal);
            EnsureModelCanScore(model);
            lock (_submit)
            {
                string input = Path.Combine(BatchFolder(id), InputFolder);
                var frames = new List<NewFrame>(extracted.Count);
                foreach (string rel in extracted)
                {
                    string target = Path.Combine(input, rel);
                    if (!File.Exists(target))
                    {
                        Directory.CreateDirectory(Path.GetDirectoryName(target)!);
                        File.Move(Path.Combine(staging, rel), target);
                    }
                    frames.Add(new NewFrame(rel, StoredPath(target)));
                }
                return Submit(id, model, "upload:" + (fileName ?? "archive"), callbackUrl, frames, chosen);
            }
        }
        finally
        {
            try { Directory.Delete(staging, recursive: true); } catch (DirectoryNotFoundException) { } catch (IOException) { }
        }
    }

    /// <summary>Cancels a queued or running batch; the frame being scored finishes. Null when there is no such batch.</summary>
    public BatchRecord? Cancel(string id)
    {
        var batch = Store.Get(id);
        if (batch is null) return null;
        if (!Store.Transition(id, BatchStates.Cancelled, [BatchStates.Queued, BatchStates.Running]))
        {
            batch = Store.Get(id)!;
            if (batch.State != BatchStates.Cancelled)
                throw new BatchException(ErrorCodes.BatchConflict, $"Batch '{id}' is already {batch.State}; only queued or running batches can be cancelled.");
            return batch;
        }
        if (_running.TryGetValue(id, out var cts)) cts.Cancel();
        Wake();
        return Store.Get(id);
    }

    public void Wake() => _wake.Writer.TryWrite(true);

    /// <summary>Waits until <see cref="Wake"/> or <paramref name="timeout"/>; throws when <paramref name="ct"/> fires.</summary>
    public async Task WaitForWorkAsync(TimeSpan timeout, CancellationToken ct)
    {
        using var cts = CancellationTokenSource.CreateLinkedTokenSource(ct);
        cts.CancelAfter(timeout);
        try
        {
            await _wake.Reader.WaitToReadAsync(cts.Token);
            _wake.Reader.TryRead(out _);
        }
        catch (OperationCanceledException) when (!ct.IsCancellationRequested) { }
    }

    /// <summary>A token fired by <see cref="Cancel"/> (or <paramref name="stopping"/>) while the batch runs here.</summary>
    internal CancellationTokenSource Track(string id, CancellationToken stopping)
    {
        var cts = CancellationTokenSource.CreateLinkedTokenSource(stopping);
        _running[id] = cts;
        return cts;
    }

    internal void Untrack(string id) => _running.TryRemove(id, out _);

    public void Dispose() => Database.Dispose();

    private (BatchRecord, bool, int) Submit(string id, string model, string source, string? callbackUrl, List<NewFrame> frames,
        IReadOnlyList<string>? artifacts)
    {
        var existing = Store.Get(id);
        if (existing is not null && existing.Model != model)
            throw new BatchException(ErrorCodes.BatchConflict, $"Batch '{id}' exists for model '{existing.Model}', not '{model}'.");
        if (existing is not null && artifacts is not null && Rendering.ArtifactChoice.Format(existing.Artifacts) != Rendering.ArtifactChoice.Format(artifacts))
            throw new BatchException(ErrorCodes.BatchConflict,
                $"Batch '{id}' writes the artifacts '{Rendering.ArtifactChoice.Format(existing.Artifacts)}'; frames added to it get the same (leave 'artifacts' out).");
        var result = Store.Submit(id, model, source, callbackUrl, frames,
            Rendering.ArtifactChoice.Format(artifacts ?? Rendering.ArtifactChoice.Lean));
        if (result.Added > 0) Wake();
        return result;
    }

    private string StoredPath(string full)
    {
        string rel = Path.GetRelativePath(DataRoot, full);
        return rel.StartsWith("..", StringComparison.Ordinal) || Path.IsPathRooted(rel) ? full : rel.Replace('\\', '/');
    }

    /// <summary>
    /// Refuses, before anything is stored, a batch whose frames would all fail: the model's profile names a method it
    /// cannot run (sml without class statistics, a method that needs logits on a probabilities model).
    /// </summary>
    private void EnsureModelCanScore(string model)
    {
        if (!_catalog.TryGet(model, out var entry) || entry.Version is not { } version) return; // refused by CheckRequest
        Models.ModelReadiness.EnsureCanScore(version.Descriptor, version.Statistics, version.Defaults, version.Folder);
    }

    /// <summary>The artifacts asked for (null when the request names none), or validation-failed naming the closest real name.</summary>
    private static IReadOnlyList<string>? CheckArtifacts(string? text) =>
        text is null ? null
        : Rendering.ArtifactChoice.Parse(text, out string? error) ?? throw new BatchException(ErrorCodes.ValidationFailed, "artifacts: " + error);

    private string CheckRequest(string model, string? batchId, string? callbackUrl)
    {
        if (string.IsNullOrWhiteSpace(model))
            throw new BatchException(ErrorCodes.ValidationFailed, "Give the model to score with ('model').");
        if (!_catalog.TryGet(model, out var entry))
            throw new BatchException(ErrorCodes.ModelNotFound, $"No model named '{model}' is installed; GET /v1/models lists the installed ones.");
        if (!entry.IsUsable)
            throw new BatchException(ApiProblems.UnusableCode(entry), $"Model '{model}' cannot be used: {entry.Error}");
        if (batchId is not null && !IsBatchId(batchId))
            throw new BatchException(ErrorCodes.ValidationFailed,
                $"Batch id '{batchId}' is not accepted: use 1 to 64 letters, digits, '.', '_' or '-', starting with a letter or digit.");
        if (callbackUrl is not null && _options.CheckCallback(callbackUrl) is { } refused)
            throw new BatchException(ErrorCodes.CallbackNotAllowed, refused);
        return batchId ?? Guid.NewGuid().ToString("N");
    }
}
