namespace Strayspot.Service.Store;

/// <summary>
/// Which store holds batches, frames and decisions: keys <c>Service:Store</c> (<c>sqlite</c>, the default: one file
/// under the data folder, nothing to set up) and <c>Service:StoreConnection</c> (a PostgreSQL connection string, for
/// <c>postgres</c>: any number of replicas share it).
/// </summary>
public sealed class StoreOptions
{
    public const string Section = "Service";

    public string Store { get; set; } = BatchDatabase.Sqlite;
    public string? StoreConnection { get; set; }

    public IEnumerable<string> Validate()
    {
        if (Store is not (BatchDatabase.Sqlite or BatchDatabase.Postgres))
            yield return $"Service:Store must be '{BatchDatabase.Sqlite}' or '{BatchDatabase.Postgres}'; got '{Store}'.";
        else if (Store == BatchDatabase.Postgres && string.IsNullOrWhiteSpace(StoreConnection))
            yield return "Service:Store is 'postgres' but Service:StoreConnection (a PostgreSQL connection string) is not set.";
    }
}
