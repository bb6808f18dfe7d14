using System.Collections.Concurrent;
using System.Text.Json;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;

namespace Strayspot.Service.Inference;

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

/// <summary>
/// The process's models: one slot per model version (<see cref="ModelVersion.Key"/>) holding the preprocessors and
/// scoring pipelines built for it, and one ONNX Runtime session per weights and descriptor
/// (<see cref="ModelVersion.SessionKey"/>), shared by the versions that differ only in statistics or profile.
/// Everything that scores frames borrows a <see cref="ModelLease"/> here. A newer version retires the older slot;
/// a session no slot or borrower holds any more is disposed, never under a frame in flight.
/// </summary>
public sealed class ModelRegistry : IDisposable
{
    private readonly object _gate = new();
    private readonly Dictionary<string, ModelSlot> _current = new(StringComparer.Ordinal);
    private readonly Dictionary<string, SharedSession> _sessions = new(StringComparer.Ordinal);
    private readonly Dictionary<string, (string Code, string Message)> _loadErrors = new(StringComparer.Ordinal);
    private readonly object _loading = new();
    private bool _disposed;

    public ModelRegistry(ParallelSettings parallel) => Parallel = parallel;

    public ParallelSettings Parallel { get; }

    /// <summary>Live ONNX Runtime sessions of the model named <paramref name="model"/> held by this registry.</summary>
    public int LiveSessions(string model)
    {
        lock (_gate) return _sessions.Values.Count(s => s.Model == model);
    }

    /// <summary>
    /// Borrows <paramref name="version"/>. With <see cref="SessionUse.Load"/> its session is loaded first when it has
    /// weights and none is loaded; with <see cref="SessionUse.IfLoaded"/> the answer is null instead;
    /// <see cref="SessionUse.None"/> borrows only the pools (logits sent by clients). Throws the load error of a
    /// version that failed to load.
    /// </summary>
    public ModelLease? Borrow(ModelVersion version, SessionUse use = SessionUse.Load)
    {
        bool needSession = version.HasWeights && use != SessionUse.None;
        if (needSession && use == SessionUse.Load && !HasSession(version)) LoadSession(version);
        lock (_gate)
        {
            ObjectDisposedException.ThrowIf(_disposed, this);
            if (_loadErrors.TryGetValue(version.SessionKey, out var error) && needSession)
                throw new ModelException(error.Code, $"Model '{version.Name}' could not be loaded: {error.Message}");
            _sessions.TryGetValue(version.SessionKey, out var session);
            if (needSession && session is null) return null; // IfLoaded, or a load that lost a race with a reload
            if (!_current.TryGetValue(version.Name, out var slot) || slot.Version.Key != version.Key)
            {
                // The new slot takes its share of a shared session before the old slot lets go of it.
                var old = slot;
                slot = new ModelSlot(version, Parallel, session);
                _current[version.Name] = slot;
                old?.Retire(this);
            }
            else if (slot.Session is null && session is not null) slot.Adopt(session);
            slot.AddBorrower();
            return new ModelLease(slot, this);
        }
    }

    /// <summary>Borrows with its session loaded, or fails with a model error when the folder changed during the load.</summary>
    public ModelLease BorrowLoaded(ModelVersion version) => Borrow(version)
        ?? throw new ModelException(ModelErrorCodes.ModelInvalid,
            $"Model '{version.Name}' changed while its {SegmentationModel.ModelFileName} was read; reload the models and retry.");

    /// <summary>Borrows and returns at once: loads and warms the session of <paramref name="version"/>.</summary>
    public void Load(ModelVersion version)
    {
        using var _ = Borrow(version);
    }

    /// <summary>The load error of a version's session, null when it loaded or was not tried.</summary>
    public string? LoadError(ModelVersion version)
    {
        lock (_gate) return _loadErrors.TryGetValue(version.SessionKey, out var e) ? e.Message : null;
    }

    /// <summary>True when <paramref name="version"/> has a warm session here (or needs none).</summary>
    public bool IsReady(ModelVersion version) => !version.HasWeights || HasSession(version);

    /// <summary>Retires every model not named in <paramref name="keep"/> (removed from the catalog).</summary>
    public void RetireExcept(IReadOnlySet<string> keep)
    {
        lock (_gate)
            foreach (var name in _current.Keys.Where(n => !keep.Contains(n)).ToList())
            {
                _current[name].Retire(this);
                _current.Remove(name);
            }
    }

    private bool HasSession(ModelVersion version)
    {
        lock (_gate) return _sessions.ContainsKey(version.SessionKey);
    }

    // One load at a time: two versions of the same weights must not both load, and loads are rare.
    private void LoadSession(ModelVersion version)
    {
        lock (_loading)
        {
            lock (_gate)
                if (_sessions.ContainsKey(version.SessionKey) || _loadErrors.ContainsKey(version.SessionKey)) return;
            SegmentationModel? model = null;
            (string Code, string Message)? error = null;
            try
            {
                model = SegmentationModel.Load(version.ModelPath, version.Descriptor, Parallel.Runtime());
                if (model.ModelSha256 != version.WeightsSha256)
                {
                    // The file is no longer this version (replaced meanwhile, or a stale version borrowed during a
                    // reload): a lost race, not a broken model. Recording it would refuse these weights for good,
                    // even after they come back; the borrower gets null and retries with the catalog's version.
                    model.Dispose();
                    return;
                }
            }
            catch (Exception e) when (e is ModelException or IOException or UnauthorizedAccessException)
            {
                model?.Dispose();
                model = null;
                error = (e is ModelException m ? m.Code : ModelErrorCodes.ModelInvalid, e.Message);
            }
            lock (_gate)
            {
                if (_disposed) { model?.Dispose(); return; }
                if (model is not null) _sessions[version.SessionKey] = new SharedSession(version.SessionKey, version.Name, model);
                else _loadErrors[version.SessionKey] = error!.Value;
            }
        }
    }

    /// <summary>Called under the gate when a slot lets go of its session.</summary>
    internal void Release(SharedSession session)
    {
        lock (_gate)
        {
            if (--session.Holders > 0) return;
            if (_sessions.TryGetValue(session.Key, out var s) && s == session) _sessions.Remove(session.Key);
        }
        session.Session.Dispose();
    }

    public void Dispose()
    {
        List<ModelSlot> slots;
        lock (_gate)
        {
            if (_disposed) return;
            _disposed = true;
            slots = _current.Values.ToList();
            _current.Clear();
        }
        foreach (var s in slots) s.Retire(this);
        // Sessions no version ever adopted.
        List<SharedSession> orphans;
        lock (_gate) orphans = _sessions.Values.Where(s => s.Holders == 0).ToList();
        foreach (var o in orphans)
        {
            lock (_gate) _sessions.Remove(o.Key);
            o.Session.Dispose();
        }
    }
}

/// <summary>One ONNX Runtime session and how many version slots hold it.</summary>
internal sealed class SharedSession(string key, string model, SegmentationModel session)
{
    public string Key { get; } = key;
    public string Model { get; } = model;
    public SegmentationModel Session { get; } = session;
    public int Holders;
}

/// <summary>A borrowed model version: its session (when it has weights) and pools. Return it by disposing.</summary>
public sealed class ModelLease : IDisposable
{
    private ModelSlot? _slot;
    private readonly ModelRegistry _registry;

    internal ModelLease(ModelSlot slot, ModelRegistry registry)
    {
        _slot = slot;
        _registry = registry;
    }

    internal ModelSlot Slot => _slot ?? throw new ObjectDisposedException(nameof(ModelLease));

    public ModelVersion Version => Slot.Version;

    /// <summary>The process's thread policy this version's session and pipelines were built with.</summary>
    public ParallelSettings Parallel => Slot.Parallel;

    /// <summary>The ONNX Runtime session; throws for a version borrowed without one.</summary>
    public SegmentationModel Session => Slot.Session?.Session
        ?? throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model '{Version.Name}' was borrowed without its {SegmentationModel.ModelFileName} session.");

    public void Dispose() => Interlocked.Exchange(ref _slot, null)?.ReturnBorrower(_registry);
}

/// <summary>One version's pools and its share of a session, counted: the registry holds one count while the version is current.</summary>
internal sealed class ModelSlot
{
    private readonly ConcurrentBag<NetworkWorker> _workers = new();
    private readonly int _perKey = Math.Max(2, Environment.ProcessorCount);
    private readonly Hosting.KeyedPool<FramePipeline> _pipelines;
    private int _borrowers = 1;
    private int _retired;

    public ModelSlot(ModelVersion version, ParallelSettings parallel, SharedSession? session)
    {
        Version = version;
        Parallel = parallel;
        _pipelines = new(_perKey, maxKeys: 32);
        if (session is not null) Adopt(session);
    }

    public ModelVersion Version { get; }
    public ParallelSettings Parallel { get; }
    public SharedSession? Session { get; private set; }

    /// <summary>Under the registry's gate.</summary>
    public void Adopt(SharedSession session)
    {
        session.Holders++;
        Session = session;
    }

    public void AddBorrower() => Interlocked.Increment(ref _borrowers);

    public void ReturnBorrower(ModelRegistry registry)
    {
        if (Interlocked.Decrement(ref _borrowers) == 0 && Session is { } s)
        {
            _workers.Clear();
            registry.Release(s);
        }
    }

    public void Retire(ModelRegistry registry)
    {
        if (Interlocked.Exchange(ref _retired, 1) == 0) ReturnBorrower(registry);
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
}

/// <summary>One worker's preprocessing buffers: the preprocessor and the scratch the padding is cut into.</summary>
internal sealed class NetworkWorker(InputDescriptor input)
{
    public readonly FramePreprocessor Preprocessor = new(input);
    public float[]? Crop;
}
