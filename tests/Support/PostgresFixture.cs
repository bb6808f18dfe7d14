namespace Strayspot.Tests.Support;

/// <summary>Theory data that yields <c>postgres</c>, skipped with the reason where no cluster can be started.</summary>
public sealed class PostgresDataAttribute : Xunit.Sdk.DataAttribute
{
    public PostgresDataAttribute()
    {
        if (PostgresCluster.SkipReason is { } reason) Skip = reason;
    }

    public override IEnumerable<object[]> GetData(System.Reflection.MethodInfo testMethod) => [["postgres"]];
}

/// <summary>A test that needs a PostgreSQL cluster; skipped, with the reason shown, where none can be started.</summary>
public sealed class PostgresFactAttribute : FactAttribute
{
    public PostgresFactAttribute()
    {
        if (PostgresCluster.SkipReason is { } reason) Skip = reason;
    }
}

/// <summary>One cluster for a collection of tests, started on first use (never where the tests are skipped).</summary>
public sealed class PostgresFixture : IDisposable
{
    private readonly Lazy<PostgresCluster> _cluster = new(() => new PostgresCluster());

    public PostgresCluster Cluster => _cluster.Value;

    public void Dispose()
    {
        if (_cluster.IsValueCreated) _cluster.Value.Dispose();
    }
}

[CollectionDefinition(Name)]
public sealed class PostgresCollection : ICollectionFixture<PostgresFixture>
{
    public const string Name = "PostgreSQL";
}
