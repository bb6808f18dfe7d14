using Strayspot.Service.Demo;

namespace Strayspot.Tests.Service.Demo;

/// <summary>Builds the demo once per test run (into a temp folder) with the same defaults as the committed models/demo.</summary>
public sealed class DemoFixture : IDisposable
{
    public DemoFixture()
    {
        Folder = Path.Combine(Path.GetTempPath(), "strayspot-demo-" + Guid.NewGuid().ToString("N"));
        var clock = System.Diagnostics.Stopwatch.StartNew();
        Result = DemoAssets.Build(Folder);
        BuildTime = clock.Elapsed;
    }

    public TimeSpan BuildTime { get; }

    public string Folder { get; }
    public DemoBuildResult Result { get; }
    public DemoModel Model => Result.Model;

    public static string CommittedFolder
    {
        get
        {
            var dir = new DirectoryInfo(AppContext.BaseDirectory);
            while (dir is not null && !File.Exists(Path.Combine(dir.FullName, "Service.sln"))) dir = dir.Parent;
            if (dir is null) throw new InvalidOperationException("Repository root (Service.sln) not found above " + AppContext.BaseDirectory);
            return Path.Combine(dir.FullName, "models", "demo");
        }
    }

    public void Dispose()
    {
        try { Directory.Delete(Folder, recursive: true); } catch (IOException) { }
    }
}

[CollectionDefinition(Name)]
public sealed class DemoCollection : ICollectionFixture<DemoFixture>
{
    public const string Name = "demo model";
}
