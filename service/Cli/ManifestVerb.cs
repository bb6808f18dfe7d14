using System.CommandLine;
using Strayspot.Service.Batches;
using Strayspot.Service.Hosting;
using Strayspot.Service.Review;
using Strayspot.Service.Store;

namespace Strayspot.Service.Cli;

/// <summary>
/// <c>strayspot manifest --batch ID [--data DIR] [--verdict V] [--out FILE]</c>: writes a batch's manifest with its
/// review decisions straight from the store, for an operator on the box (the service may run or not). The store is
/// the one the service is configured with (<c>Service:Store</c>, <c>Service:StoreConnection</c> from appsettings.json
/// or <c>STRAYSPOT_</c> environment variables): the SQLite file under the data folder, or the shared PostgreSQL.
/// </summary>
public static class ManifestVerb
{
    public const int BadInput = 2;

    /// <param name="configuration">Where the store settings come from; by default as the service reads them.</param>
    public static Command Create(IConfiguration? configuration = null)
    {
        var data = new Option<DirectoryInfo>("--data")
        {
            Description = "The service's data folder (Service:DataRoot).",
            DefaultValueFactory = _ => new DirectoryInfo("data"),
        };
        var database = new Option<FileInfo?>("--database") { Description = "The SQLite batch database, when not in its default place (Service:Batches:DatabasePath)." };
        var batch = new Option<string>("--batch") { Description = "The batch id.", Required = true };
        var verdict = new Option<string?>("--verdict")
        {
            Description = $"Only frames with this verdict on the frame or a region: {string.Join(", ", Verdicts.All)}.",
        };
        var output = new Option<FileInfo?>("--out")
        {
            Description = "Where to write; default manifest.jsonl in the batch folder (manifest.<verdict>.jsonl with --verdict).",
        };
        var command = new Command("manifest", "Write a batch's manifest (frames by score, regions, review decisions) from the store (Service:Store).");
        foreach (var o in new Option[] { data, database, batch, verdict, output }) command.Options.Add(o);
        command.SetAction(parse =>
        {
            var outWriter = parse.InvocationConfiguration.Output;
            var err = parse.InvocationConfiguration.Error;
            string dataRoot = parse.GetValue(data)!.FullName;
            var options = new BatchOptions { DatabasePath = parse.GetValue(database)?.FullName };
            string dbPath = options.ResolveDatabase(dataRoot);
            string id = parse.GetValue(batch)!;
            string? only = parse.GetValue(verdict);
            if (only is not null && !Verdicts.IsKnown(only))
            {
                err.WriteLine($"error: --verdict must be one of {string.Join(", ", Verdicts.All)}; got '{only}'.");
                return BadInput;
            }
            var settings = new StoreOptions();
            (configuration ?? ServiceConfiguration()).GetSection(StoreOptions.Section).Bind(settings);
            if (settings.Validate().FirstOrDefault() is { } bad)
            {
                err.WriteLine($"error: {bad}");
                return BadInput;
            }
            bool postgres = settings.Store == BatchDatabase.Postgres;
            // Never create a database from a mistyped path: the store would make an empty one.
            if (!postgres && !File.Exists(dbPath))
            {
                err.WriteLine($"error: there is no batch database at {dbPath}; give the service's --data folder or --database " +
                              "(or set Service:Store to postgres with Service:StoreConnection, as the service has it).");
                return BadInput;
            }
            try
            {
                using var database = postgres ? BatchDatabase.OpenPostgres(settings.StoreConnection!) : BatchDatabase.OpenSqlite(dbPath);
                var store = database.Batches;
                if (!BatchService.IsBatchId(id) || store.Get(id) is not { } record)
                {
                    var known = store.List(10).Select(b => b.Id).ToList();
                    err.WriteLine($"error: there is no batch '{id}' in {database.Describe}" +
                                  (known.Count > 0 ? $"; the newest are {string.Join(", ", known)}." : "; it holds no batches."));
                    return BadInput;
                }
                var decisions = database.Decisions.Effective(id);
                string batchFolder = Path.Combine(options.ResolveRoot(dataRoot), id);
                var lines = Manifest.Lines(batchFolder, record, store.Frames(id), decisions, only);
                string target = parse.GetValue(output)?.FullName
                                ?? Path.Combine(batchFolder, only is null ? Manifest.FileName : $"manifest.{only}.jsonl");
                Directory.CreateDirectory(Path.GetDirectoryName(target)!);
                int written = 0;
                AtomicFile.Write(target, s => written = Manifest.WriteTo(s, lines));
                outWriter.WriteLine($"Wrote {written} frame line(s) of batch '{id}' with {decisions.Count} decision(s) to {target}");
                return 0;
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException or Microsoft.Data.Sqlite.SqliteException
                                          or StoreUnavailableException or Npgsql.NpgsqlException or ArgumentException or InvalidOperationException)
            {
                err.WriteLine($"error: {e.Message}");
                return BadInput;
            }
        });
        return command;
    }

    /// <summary>The service's own configuration sources for the store settings: appsettings.json beside the executable, then STRAYSPOT_ variables.</summary>
    private static IConfiguration ServiceConfiguration() => new ConfigurationBuilder()
        .AddJsonFile(Path.Combine(AppContext.BaseDirectory, "appsettings.json"), optional: true)
        .AddEnvironmentVariables(ServiceHost.EnvironmentPrefix)
        .Build();
}
