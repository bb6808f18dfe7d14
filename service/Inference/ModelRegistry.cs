using System.Collections.Concurrent;
using System.Text.Json;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;

namespace Strayspot.Service.Inference;

/// <summary>
/// The process's models, one slot per <see cref="ModelVersion.Key"/>: at most one ONNX Runtime session per version,
/// with the preprocessors and scoring pipelines built for that version. Everything that scores frames borrows a
/// <see cref="ModelLease"/> here. A newer version of a model retires the older slot; a retired slot's session is
/// disposed when its last borrower returns it, never under a frame in flight.
/// </summary>
public sealed class ModelRegistry : IDisposable
{
    private readonly object _gate = new();
    private readonly Dictionary<string, ModelSlot> _current = new(StringComparer.Ordinal);
    private bool _disposed;

    public ModelRegistry(ParallelSettings parallel) => Parallel = parallel;

    public ParallelSettings Parallel { get; }

    /// <summary>
    /// Borrows <paramref name="version"/>. With <see cref="SessionUse.Load"/> its session is loaded first when it has
    /// weights and none is loaded; with <see cref="SessionUse.IfLoaded"/> the answer is null instead;
    /// <see cref="SessionUse.None"/> borrows only the pools (logits sent by clients). Throws the load error of a
    /// version that failed to load.
    /// </summary>
    public ModelLease? Borrow(ModelVersion version, SessionUse use = SessionUse.Load)
    {
        bool needSession = version.HasWeights && use != SessionUse.None;
        ModelSlot slot;
        lock (_gate)
        {
            ObjectDisposedException.ThrowIf(_disposed, this);
            if (!_current.TryGetValue(version.Name, out var have) || have.Version.Key != version.Key)
            {
                if (needSession && use == SessionUse.IfLoaded) return null;
                have?.Retire();
                have = new ModelSlot(version, Parallel);
                _current[version.Name] = have;
            }
            slot = have;
            slot.AddBorrower();
        }
        try
        {
            if (needSession && !slot.EnsureSession(use == SessionUse.Load))
            {
                slot.ReturnBorrower();
                return null;
            }
            return new ModelLease(slot);
        }
        catch
        {
            slot.ReturnBorrower();
            throw;
        }
    }

    /// <summary>Borrows and returns at once: loads and warms the session of <paramref name="version"/>.</summary>
    public void Load(ModelVersion version)
    {
        using var _ = Borrow(version);
    }

    /// <summary>The load error of the current version of a model, null when it loaded or is not tried yet.</summary>
    public string? LoadError(ModelVersion version)
    {
        lock (_gate)
            return _current.TryGetValue(version.Name, out var s) && s.Version.Key == version.Key ? s.LoadError : null;
    }

    /// <summary>True when <paramref name="version"/> is current here with a warm session (or needs none).</summary>
    public bool IsReady(ModelVersion version)
    {
        lock (_gate)
            return _current.TryGetValue(version.Name, out var s) && s.Version.Key == version.Key && (!version.HasWeights || s.HasSession);
    }

    /// <summary>Retires every model not named in <paramref name="keep"/> (removed from the catalog).</summary>
    public void RetireExcept(IReadOnlySet<string> keep)
    {
        lock (_gate)
            foreach (var name in _current.Keys.Where(n => !keep.Contains(n)).ToList())
            {
                _current[name].Retire();
                _current.Remove(name);
            }
    }

    public void Dispose()
    {
        lock (_gate)
        {
            if (_disposed) return;
            _disposed = true;
            foreach (var s in _current.Values) s.Retire();
            _current.Clear();
        }
    }
}

/// <summary>What a borrower needs of the version's ONNX Runtime session.</summary>
public enum SessionUse
{
    /// <summary>Load it when it is not loaded yet (background work, the command line).</summary>
    Load,
    /// <summary>Only a session already loaded (requests: loading is the background loader's job).</summary>
    IfLoaded,
    /// <summary>No session: only the version's pipelines (logits computed elsewhere).</summary>
    None,
}

/// <summary>A borrowed model version: its session (when it has weights) and pools. Return it by disposing.</summary>
public sealed class ModelLease : IDisposable
{
    private ModelSlot? _slot;

    internal ModelLease(ModelSlot slot) => _slot = slot;

    internal ModelSlot Slot => _slot ?? throw new ObjectDisposedException(nameof(ModelLease));

    public ModelVersion Version => Slot.Version;

    /// <summary>The process's thread policy this version's session and pipelines were built with.</summary>
    public ParallelSettings Parallel => Slot.Parallel;

    /// <summary>The ONNX Runtime session; throws for a version without weights.</summary>
    public SegmentationModel Session => Slot.Session
        ?? throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model '{Version.Name}' has no {SegmentationModel.ModelFileName}.");

    public void Dispose() => Interlocked.Exchange(ref _slot, null)?.ReturnBorrower();
}

/// <summary>One version's session and pools, counted: the registry holds one count while the version is current.</summary>
internal sealed class ModelSlot
{
    private readonly object _load = new();
    private readonly ConcurrentBag<NetworkWorker> _workers = new();
    private readonly int _perKey = Math.Max(2, Environment.ProcessorCount);
    private readonly Hosting.KeyedPool<FramePipeline> _pipelines;
    private SegmentationModel? _session;
    private int _borrowers = 1;
    private int _retired;

    public ModelSlot(ModelVersion version, ParallelSettings parallel)
    {
        Version = version;
        Parallel = parallel;
        _pipelines = new(_perKey, maxKeys: 32);
    }

    public ModelVersion Version { get; }
    public ParallelSettings Parallel { get; }
    public SegmentationModel? Session => Volatile.Read(ref _session);
    public bool HasSession => Session is not null;
    public string? LoadError { get; private set; }

    public void AddBorrower() => Interlocked.Increment(ref _borrowers);

    public void ReturnBorrower()
    {
        if (Interlocked.Decrement(ref _borrowers) == 0) Close();
    }

    public void Retire()
    {
        if (Interlocked.Exchange(ref _retired, 1) == 0) ReturnBorrower();
    }

    /// <summary>Loads the session once; a failed load is remembered and rethrown to every borrower.</summary>
    public bool EnsureSession(bool load)
    {
        if (Session is not null) return true;
        lock (_load)
        {
            if (Session is not null) return true;
            if (LoadError is not null) throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model '{Version.Name}' could not be loaded: {LoadError}");
            if (!load) return false;
            try
            {
                var session = SegmentationModel.Load(Version.ModelPath, Version.Descriptor, Parallel.Runtime());
                if (session.ModelSha256 != Version.WeightsSha256)
                {
                    session.Dispose();
                    throw new ModelException(ModelErrorCodes.ModelInvalid,
                        $"{SegmentationModel.ModelFileName} changed while it was read (SHA-256 {session.ModelSha256}, expected {Version.WeightsSha256}); reload the models.");
                }
                Volatile.Write(ref _session, session);
                return true;
            }
            catch (Exception e) when (e is ModelException or IOException or UnauthorizedAccessException)
            {
                LoadError = e.Message;
                throw;
            }
        }
    }

    public NetworkWorker RentWorker() => _workers.TryTake(out var w) ? w : new NetworkWorker(Version.Descriptor.Input);

    public void ReturnWorker(NetworkWorker worker)
    {
        if (_workers.Count < _perKey) _workers.Add(worker);
    }

    /// <summary>A pipeline for exactly these options under this version's statistics.</summary>
    public FramePipeline RentPipeline(ScoringOptions options, out string key)
    {
        key = JsonSerializer.Serialize(options) + "|" + string.Join(',', options.MarkedSurfaceClasses ?? []);
        return _pipelines.Rent(key, () => new FramePipeline(options, Version.StatisticsFor(options), Parallel.ScoringThreads));
    }

    public void ReturnPipeline(string key, FramePipeline pipeline) => _pipelines.Return(key, pipeline);

    private void Close()
    {
        Interlocked.Exchange(ref _session, null)?.Dispose();
        _workers.Clear();
    }
}

/// <summary>One worker's preprocessing buffers: the preprocessor and the scratch the padding is cut into.</summary>
internal sealed class NetworkWorker(InputDescriptor input)
{
    public readonly FramePreprocessor Preprocessor = new(input);
    public float[]? Crop;
}
