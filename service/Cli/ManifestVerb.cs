using System.CommandLine;
using Strayspot.Service.Batches;
using Strayspot.Service.Review;

namespace Strayspot.Service.Cli;

/// <summary>
/// <c>strayspot manifest --batch ID [--data DIR] [--verdict V] [--out FILE]</c>: writes a batch's manifest with its
/// review decisions straight from the batch database, for an operator on the box (the service may run or not).
/// </summary>
public static class ManifestVerb
{
    public const int BadInput = 2;

    public static Command Create()
    {
        var data = new Option<DirectoryInfo>("--data")
        {
            Description = "The service's data folder (Service:DataRoot).",
            DefaultValueFactory = _ => new DirectoryInfo("data"),
        };
        var database = new Option<FileInfo?>("--database") { Description = "The batch database, when not in its default place (Service:Batches:DatabasePath)." };
        var batch = new Option<string>("--batch") { Description = "The batch id.", Required = true };
        var verdict = new Option<string?>("--verdict")
        {
            Description = $"Only frames with this verdict on the frame or a region: {string.Join(", ", Verdicts.All)}.",
        };
        var output = new Option<FileInfo?>("--out")
        {
            Description = "Where to write; default manifest.jsonl in the batch folder (manifest.<verdict>.jsonl with --verdict).",
        };
        var command = new Command("manifest", "Write a batch's manifest (frames by score, regions, review decisions) from the batch database.");
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
            // Never create a database from a mistyped path: the store would make an empty one.
            if (!File.Exists(dbPath))
            {
                err.WriteLine($"error: there is no batch database at {dbPath}; give the service's --data folder or --database.");
                return BadInput;
            }
            try
            {
                using var database = Store.BatchDatabase.OpenSqlite(dbPath);
                var store = database.Batches;
                if (!BatchService.IsBatchId(id) || store.Get(id) is not { } record)
                {
                    var known = store.List(10).Select(b => b.Id).ToList();
                    err.WriteLine($"error: there is no batch '{id}' in {dbPath}" +
                                  (known.Count > 0 ? $"; the newest are {string.Join(", ", known)}." : "; it holds no batches."));
                    return BadInput;
                }
                var decisions = database.Decisions.Effective(id);
                var lines = Manifest.Lines(record, store.Frames(id), decisions, only);
                string target = parse.GetValue(output)?.FullName
                                ?? Path.Combine(options.ResolveRoot(dataRoot), id, only is null ? Manifest.FileName : $"manifest.{only}.jsonl");
                Directory.CreateDirectory(Path.GetDirectoryName(target)!);
                AtomicFile.Write(target, s => Manifest.WriteTo(s, lines));
                outWriter.WriteLine($"Wrote {lines.Count} frame line(s) of batch '{id}' with {decisions.Count} decision(s) to {target}");
                return 0;
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException or Microsoft.Data.Sqlite.SqliteException)
            {
                err.WriteLine($"error: {e.Message}");
                return BadInput;
            }
        });
        return command;
    }
}
