using Microsoft.Extensions.Configuration;
using System.CommandLine;
using System.Text.Json;
using Strayspot.Service.Batches;
using Strayspot.Service.Cli;
using Strayspot.Service.Reports;
using Strayspot.Service.Review;

namespace Strayspot.Tests.Service.Cli;

public sealed class ManifestVerbTests : IDisposable
{
    private readonly string _data = Directory.CreateTempSubdirectory("strayspot-manifest-").FullName;

    private static Task<(int Exit, string Out, string Err)> Run(params string[] args) => RunWith(null, args);

    /// <summary>Runs the verb with the store settings given (as a configuration would); null: read as the service reads them.</summary>
    internal static async Task<(int Exit, string Out, string Err)> RunWith(IDictionary<string, string?>? settings, params string[] args)
    {
        var output = new StringWriter();
        var error = new StringWriter();
        var configuration = settings is null ? null : new ConfigurationBuilder().AddInMemoryCollection(settings).Build();
        int exit = await ManifestVerb.Create(configuration).Parse(args).InvokeAsync(new InvocationConfiguration { Output = output, Error = error });
        return (exit, output.ToString(), error.ToString());
    }

    private void SeedBatch()
    {
        using var database = Strayspot.Service.Store.BatchDatabase.OpenSqlite(Path.Combine(_data, ".strayspot", "batches.db"));
        SeedBatch(database, _data);
    }

    private const string SizeWarning = """{"code":"frame-size-differs","message":"The frame is 48×32, but the calibration was measured on 24×16 frames."}""";

    /// <summary>
    /// A batch of three done frames as the service leaves it, with decisions on two of them and a report.json that
    /// warns on one (another's report is gone); and a batch of one recording whose tracks.json warns.
    /// </summary>
    internal static void SeedBatch(Strayspot.Service.Store.BatchDatabase database, string data)
    {
        var store = database.Batches;
        store.Submit("night", "demo", "folder:cams", null, [new NewFrame("a.png", "cams/a.png"), new NewFrame("b.png", "cams/b.png"), new NewFrame("c.png", "cams/c.png")]);
        store.Transition("night", BatchStates.Running, [BatchStates.Queued]);
        float[] scores = [3.1f, 4.2f, 2.0f];
        for (int seq = 1; seq <= 3; seq++)
        {
            var start = store.ClaimNextFrame("night", "seed", TimeSpan.FromMinutes(1))!;
            var region = new ManifestRegion(1, new BoxReport(4, 4, 8, 6), 30, 2.5f, scores[seq - 1], 0, "pavement", true, [[4, 4], [11, 4], [11, 9]]);
            store.CompleteFrame(start, new FrameResult(scores[seq - 1], 1, $"frames/{start.Seq:D5}/report.json", Manifest.RegionsJson([region])));
        }
        database.Decisions.Decide("night", 2, 1, Verdicts.LabelIt, "chock left behind", "tester");
        database.Decisions.Decide("night", 1, null, Verdicts.FalseAlarm, null, "tester");
        string night = Path.Combine(data, "batches", "night", "frames");
        Directory.CreateDirectory(Path.Combine(night, "00001"));
        Directory.CreateDirectory(Path.Combine(night, "00002"));
        File.WriteAllText(Path.Combine(night, "00001", "report.json"), """{"frameId":"a.png","regions":[{"id":1,"box":{"x":4}}],"warnings":[],"notice":"n"}""");
        // Warnings after the regions, as the report writes them; names inside the regions are stepped over.
        File.WriteAllText(Path.Combine(night, "00002", "report.json"),
            $$"""{"frameId":"b.png","regions":[{"id":1,"warnings":[{"code":"not-this","message":"m"}]}],"timingsMs":{"total":3.5},"warnings":[{{SizeWarning}}],"notice":"n"}""");

        store.Submit("rig", "demo", "folder:rig", null, [new NewFrame("pass.mp4", "rig/pass.mp4")]);
        store.Transition("rig", BatchStates.Running, [BatchStates.Queued]);
        var claim = store.ClaimNextFrame("rig", "seed", TimeSpan.FromMinutes(1))!;
        var track = new ManifestRegion(1, new BoxReport(4, 4, 8, 6), 2, 2.5f, 3.5f, 0, "pavement", false, []);
        store.CompleteFrame(claim, new FrameResult(3.5f, 1, "frames/00001/tracks.json", Manifest.RegionsJson([track])));
        string rig = Path.Combine(data, "batches", "rig", "frames", "00001");
        Directory.CreateDirectory(rig);
        File.WriteAllText(Path.Combine(rig, "tracks.json"),
            $$"""{"recording":"pass.mp4","frame":{"width":48,"height":32},"framesScored":2,"tracks":[],"segments":[],"warnings":[{{SizeWarning}}]}""");
        File.WriteAllText(Path.Combine(rig, "frames.jsonl"),
            """
            {"frameId":"pass.mp4@000000","index":0,"timeSeconds":0,"frameScore":3.5,"anomalousShare":0.01,"regions":[]}
            {"frameId":"pass.mp4@000002","index":2,"timeSeconds":0.2,"frameScore":1.5,"anomalousShare":0,"regions":[]}

            """);
    }

    /// <summary>The lines repeat their report's warnings: a frame's on its line, a recording's once on the recording line.</summary>
    internal static void AssertWarnings(string data, List<JsonElement> night, List<JsonElement> rig)
    {
        static string[] Codes(JsonElement line) =>
            line.TryGetProperty("warnings", out var w) ? w.EnumerateArray().Select(x => x.GetProperty("code").GetString()!).ToArray() : [];
        Assert.Equal(["b.png", "a.png", "c.png"], night.Select(l => l.GetProperty("frameId").GetString()));
        Assert.Equal(["frame-size-differs"], Codes(night[0]));
        Assert.Contains("measured on 24×16", night[0].GetProperty("warnings")[0].GetProperty("message").GetString());
        Assert.False(night[1].TryGetProperty("warnings", out _), "no warnings, no field");
        Assert.False(night[2].TryGetProperty("warnings", out _), "a report that is gone adds nothing");
        Assert.Equal(["recording", "recording-frame", "recording-frame"], rig.Select(l => l.GetProperty("kind").GetString()));
        Assert.Equal(["frame-size-differs"], Codes(rig[0]));
        Assert.All(rig.Skip(1), l => Assert.Empty(Codes(l)));
        Assert.True(File.Exists(Path.Combine(data, "batches", "rig", "frames", "00001", "frames.jsonl")));
    }

    internal static List<JsonElement> ManifestOf(string data, string batch) =>
        File.ReadAllLines(Path.Combine(data, "batches", batch, "manifest.jsonl")).Select(l => JsonDocument.Parse(l).RootElement).ToList();

    [Fact]
    public async Task Frame_and_recording_lines_repeat_their_reports_warnings()
    {
        SeedBatch();
        Assert.Equal(0, (await Run("--data", _data, "--batch", "night")).Exit);
        var rig = await Run("--data", _data, "--batch", "rig");
        Assert.True(rig.Exit == 0, rig.Err);
        AssertWarnings(_data, ManifestOf(_data, "night"), ManifestOf(_data, "rig"));
    }

    [Fact]
    public async Task Writes_the_manifest_with_decisions_into_the_batch_folder_and_filters_by_verdict()
    {
        SeedBatch();
        var all = await Run("--data", _data, "--batch", "night");
        Assert.True(all.Exit == 0, all.Err);
        Assert.Contains("3 frame line(s)", all.Out);
        Assert.Contains("2 decision(s)", all.Out);
        var lines = File.ReadAllLines(Path.Combine(_data, "batches", "night", "manifest.jsonl")).Select(l => JsonDocument.Parse(l).RootElement).ToList();
        Assert.Equal(["b.png", "a.png", "c.png"], lines.Select(l => l.GetProperty("frameId").GetString()));
        Assert.Equal("chock left behind", lines[0].GetProperty("regions")[0].GetProperty("decision").GetProperty("note").GetString());
        Assert.Equal("false-alarm", lines[1].GetProperty("decision").GetProperty("verdict").GetString());
        Assert.False(lines[2].TryGetProperty("decision", out _));

        string only = Path.Combine(_data, "accepted.jsonl");
        var accepted = await Run("--data", _data, "--batch", "night", "--verdict", "label-it", "--out", only);
        Assert.True(accepted.Exit == 0, accepted.Err);
        Assert.Equal(["b.png"], File.ReadAllLines(only).Select(l => JsonDocument.Parse(l).RootElement.GetProperty("frameId").GetString()));
    }

    [Fact]
    public async Task Unknown_batches_missing_databases_and_bad_verdicts_exit_2_with_a_message()
    {
        SeedBatch();
        var unknown = await Run("--data", _data, "--batch", "day");
        Assert.Equal(2, unknown.Exit);
        Assert.Contains("no batch 'day'", unknown.Err);
        Assert.Contains("night", unknown.Err);

        string elsewhere = Path.Combine(_data, "nowhere");
        var missing = await Run("--data", elsewhere, "--batch", "night");
        Assert.Equal(2, missing.Exit);
        Assert.Contains("no batch database", missing.Err);
        Assert.False(Directory.Exists(elsewhere), "a mistyped folder must not gain an empty database");

        var verdict = await Run("--data", _data, "--batch", "night", "--verdict", "keep");
        Assert.Equal(2, verdict.Exit);
        Assert.Contains("label-it", verdict.Err);
    }

    public void Dispose()
    {
        Microsoft.Data.Sqlite.SqliteConnection.ClearAllPools();
        try { Directory.Delete(_data, recursive: true); } catch (IOException) { }
    }
}

/// <summary>The verb reads the store the service is configured with: here a real PostgreSQL (started as the postgres user).</summary>
[Collection(Strayspot.Tests.Support.PostgresCollection.Name)]
public sealed class ManifestVerbPostgresTests(Strayspot.Tests.Support.PostgresFixture postgres) : IDisposable
{
    private readonly string _data = Directory.CreateTempSubdirectory("strayspot-manifest-pg-").FullName;

    [Strayspot.Tests.Support.PostgresFact]
    public async Task Reads_the_batch_from_the_configured_postgres_store_and_never_makes_a_sqlite_file()
    {
        string connection = postgres.Cluster.CreateDatabase();
        using (var database = Strayspot.Service.Store.BatchDatabase.OpenPostgres(connection)) ManifestVerbTests.SeedBatch(database, _data);
        var settings = new Dictionary<string, string?> { ["Service:Store"] = "postgres", ["Service:StoreConnection"] = connection };

        var all = await ManifestVerbTests.RunWith(settings, "--data", _data, "--batch", "night");
        Assert.True(all.Exit == 0, all.Err);
        Assert.Contains("3 frame line(s) of batch 'night' with 2 decision(s)", all.Out);
        var lines = File.ReadAllLines(Path.Combine(_data, "batches", "night", "manifest.jsonl")).Select(l => JsonDocument.Parse(l).RootElement).ToList();
        Assert.Equal(["b.png", "a.png", "c.png"], lines.Select(l => l.GetProperty("frameId").GetString()));
        Assert.Equal("chock left behind", lines[0].GetProperty("regions")[0].GetProperty("decision").GetProperty("note").GetString());
        Assert.False(File.Exists(Path.Combine(_data, ".strayspot", "batches.db")), "the SQLite store must not be opened");
        Assert.Equal(0, (await ManifestVerbTests.RunWith(settings, "--data", _data, "--batch", "rig")).Exit);
        ManifestVerbTests.AssertWarnings(_data, lines, ManifestVerbTests.ManifestOf(_data, "rig"));

        var unknown = await ManifestVerbTests.RunWith(settings, "--data", _data, "--batch", "day");
        Assert.Equal(2, unknown.Exit);
        Assert.Contains("no batch 'day' in postgres://", unknown.Err);
        Assert.Contains("night", unknown.Err);

        var unset = await ManifestVerbTests.RunWith(new Dictionary<string, string?> { ["Service:Store"] = "postgres" }, "--data", _data, "--batch", "night");
        Assert.Equal(2, unset.Exit);
        Assert.Contains("Service:StoreConnection", unset.Err);

        var wrongDatabase = new Npgsql.NpgsqlConnectionStringBuilder(connection) { Database = "no_such_database" }.ToString();
        var wrong = await ManifestVerbTests.RunWith(new Dictionary<string, string?> { ["Service:Store"] = "postgres", ["Service:StoreConnection"] = wrongDatabase },
            "--data", _data, "--batch", "night");
        Assert.Equal(2, wrong.Exit);
        Assert.Contains("no_such_database", wrong.Err);
    }

    public void Dispose()
    {
        try { Directory.Delete(_data, recursive: true); } catch (IOException) { }
    }
}
