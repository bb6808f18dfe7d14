using Microsoft.Data.Sqlite;
using Strayspot.Service.Batches;
using Strayspot.Service.Reports;
using Strayspot.Service.Review;

namespace Strayspot.Tests.Service.Review;

/// <summary>The review tables in the batch store: the region index and the decisions, across reopening.</summary>
public sealed class ReviewStoreTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("strayspot-review-store-").FullName;
    private string Db => Path.Combine(_folder, "batches.db");

    private static ManifestRegion Region(int id, string beneath, float max) =>
        new(id, new BoxReport(0, 0, 2, 2), 4, max - 1, max, beneath, false, [[0, 0], [1, 0], [1, 1]]);

    private static void Score(BatchStore store, string batch, params ManifestRegion[][] regionsPerFrame)
    {
        store.Transition(batch, BatchStates.Running, [BatchStates.Queued, BatchStates.Running]);
        foreach (var regions in regionsPerFrame)
        {
            var f = store.StartNextFrame(batch)!;
            Assert.True(store.CompleteFrame(batch, f.Seq, new FrameResult(3f, regions.Length, $"frames/{f.Seq:D5}/report.json", Manifest.RegionsJson(regions))));
        }
    }

    [Fact]
    public void Scored_frames_index_their_regions_and_an_older_database_is_indexed_when_opened()
    {
        using (var store = new BatchStore(Db))
        {
            store.Submit("b", "m", "folder:x", null, [new NewFrame("1.png", "x/1.png"), new NewFrame("2.png", "x/2.png"), new NewFrame("3.png", "x/3.png")]);
            Score(store, "b", [Region(1, "apron", 4f), Region(2, "grass", float.PositiveInfinity)], [], [Region(1, "apron", 2.5f)]);
            var briefs = store.RegionBriefs("b");
            Assert.Equal([(1, 1, "apron", 4f), (1, 2, "grass", float.PositiveInfinity), (3, 1, "apron", 2.5f)],
                briefs.Select(b => (b.Seq, b.Region, b.ClassBeneath, b.MaxScore)));
        }
        // A database written before the index existed: the rows are gone, the frames' regions are not.
        using (var raw = new SqliteConnection($"Data Source={Db};Pooling=False"))
        {
            raw.Open();
            using var cmd = raw.CreateCommand();
            cmd.CommandText = "DELETE FROM frame_regions";
            Assert.Equal(3, cmd.ExecuteNonQuery());
        }
        using (var reopened = new BatchStore(Db))
        {
            Assert.Equal(3, reopened.RegionBriefs("b").Count);
            Assert.Equal([(1, 2), (2, 0), (3, 1)], reopened.FrameSummaries("b").Select(f => (f.Seq, f.RegionCount ?? -1)));
        }
    }

    [Fact]
    public void A_decision_replaces_the_last_one_on_its_target_and_the_log_keeps_both()
    {
        using var store = new BatchStore(Db);
        store.Submit("b", "m", "folder:x", null, [new NewFrame("1.png", "x/1.png")]);
        Score(store, "b", [Region(1, "apron", 4f)]);
        var first = store.Decide("b", 1, 1, Verdicts.Unsure, "first look", "ann");
        var second = store.Decide("b", 1, 1, Verdicts.LabelIt, null, "bo");
        Assert.True(second.Revision > first.Revision);
        var now = Assert.Single(store.Decisions("b"));
        Assert.Equal((Verdicts.LabelIt, (string?)null, "bo"), (now.Verdict, now.Note, now.DecidedBy));
        Assert.Equal(["first look", null], store.DecisionLog("b").Select(e => e.Note));
        Assert.True(store.Withdraw("b", 1, 1, "bo"));
        Assert.False(store.Withdraw("b", 1, 1, "bo"));
        Assert.Empty(store.Decisions("b"));
        Assert.Equal(3, store.DecisionLog("b").Count);
    }

    public void Dispose()
    {
        SqliteConnection.ClearAllPools();
        try { Directory.Delete(_folder, recursive: true); } catch (IOException) { }
    }
}
