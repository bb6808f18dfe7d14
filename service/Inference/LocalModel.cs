namespace Strayspot.Service.Inference;

/// <summary>
/// A model folder opened for a command-line run or a test: the run's registry, the version borrowed from it and a
/// runner. The service does not use this: its registry, runner and observer come from the host.
/// </summary>
public sealed class LocalModel : IDisposable
{
    private LocalModel(ModelRegistry registry, ModelLease lease, FrameRunner runner)
    {
        Registry = registry;
        Lease = lease;
        Runner = runner;
    }

    public ModelRegistry Registry { get; }
    public ModelLease Lease { get; }
    public FrameRunner Runner { get; }
    public ModelVersion Version => Lease.Version;

    public static LocalModel Open(string folder, ParallelSettings? parallel = null, IFrameObserver? observer = null) =>
        Open(ModelVersion.Read(folder), parallel, observer);

    public static LocalModel Open(ModelVersion version, ParallelSettings? parallel = null, IFrameObserver? observer = null)
    {
        var registry = new ModelRegistry(parallel ?? ParallelSettings.Default);
        try
        {
            return new LocalModel(registry, registry.BorrowLoaded(version), new FrameRunner(observer));
        }
        catch
        {
            registry.Dispose();
            throw;
        }
    }

    public void Dispose()
    {
        Lease.Dispose();
        Registry.Dispose();
    }
}
