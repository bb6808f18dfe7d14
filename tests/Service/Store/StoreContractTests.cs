using Strayspot.Service.Batches;
using Strayspot.Service.Reports;
using Strayspot.Service.Review;
using Strayspot.Service.Store;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Store;

/// <summary>
/// One set of checks for both store engines: every test runs on SQLite and on a real PostgreSQL cluster (started
/// by the fixture as the postgres user; skipped with the reason where that cannot be done).
/// </summary>
[Collection(PostgresCollection.Name)]
public sealed class StoreContractTests(PostgresFixture postgres) : IDisposable
{
    private static readonly TimeSpan Lease = TimeSpan.FromSeconds(30);
    private readonly string _folder = Path.Combine(Path.GetTempPath(), "strayspot-store-" + Guid.NewGuid().ToString("N"));
    private readonly List<BatchDatabase> _open = [];

    private BatchDatabase Open(string engine)
    {
        var db = engine == BatchDatabase.Sqlite
            ? BatchDatabase.OpenSqlite(Path.Combine(_folder, "batches.db"))
            : BatchDatabase.OpenPostgres(postgres.Cluster.CreateDatabase());
        _open.Add(db);
        return db;
    }

    private static NewFrame[] Frames(int n) => Enumerable.Range(1, n).Select(i => new NewFrame($"f{i:D3}.png", $"x/f{i:D3}.png")).ToArray();

    private static ManifestRegion Region(int id, string beneath, float max) =>
        new(id, new BoxReport(0, 0, 2, 2), 4, max - 1, max, 0, beneath, false, [[0, 0], [1, 0], [1, 1]]);

    private static FrameResult Result(FrameClaim c, float score = 1f, params ManifestRegion[] regions) =>
        new(score, regions.Length, $"frames/{c.Seq:D5}/report.json", Manifest.RegionsJson(regions));

    private static void Run(IBatchStore s, string id) => Assert.True(s.Transition(id, BatchStates.Running, [BatchStates.Queued, BatchStates.Running]));

    [Theory, InlineData("sqlite"), PostgresData]
    public void Submitting_again_adds_only_new_frames_and_requeues_a_done_batch(string engine)
    {
        var s = Open(engine).Batches;
        var (batch, created, added) = s.Submit("b1", "m", "folder:x", null, [new("a.png", "x/a.png"), new("b.png", "x/b.png"), new("a.png", "x/a2.png")]);
        Assert.Equal((true, 2, 2, BatchStates.Queued), (created, added, batch.FrameCount, batch.State));
        Run(s, "b1");
        for (int i = 0; i < 2; i++) Assert.True(s.CompleteFrame(s.ClaimNextFrame("b1", "me", Lease)!, new FrameResult(1, 0, "r", "[]")));
        Assert.True(s.FinishIfComplete("b1"));
        Assert.False(s.FinishIfComplete("b1"));
        Assert.Equal(BatchStates.Done, s.Get("b1")!.State);
        (batch, created, added) = s.Submit("b1", "m", "folder:x", null, [new("a.png", "x/a.png"), new("c.png", "x/c.png")]);
        Assert.Equal((false, 1, 3, BatchStates.Queued), (created, added, batch.FrameCount, batch.State));
        Assert.Equal([1, 2, 3], s.Frames("b1").Select(f => f.Seq));
        Assert.Equal("c.png", s.Frame("b1", 3)!.FrameId);
        Assert.Equal(["b1"], s.Runnable().Select(b => b.Id));
        Assert.Equal(["b1"], s.List(state: BatchStates.Queued).Select(b => b.Id));
        Assert.Empty(s.List(state: BatchStates.Running));
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void A_claimed_frame_is_finished_once_and_only_by_its_owner(string engine)
    {
        var s = Open(engine).Batches;
        s.Submit("b", "m", "folder:x", null, Frames(3));
        Assert.Null(s.ClaimNextFrame("b", "a", Lease)); // queued, not running yet
        Run(s, "b");
        var a = s.ClaimNextFrame("b", "a", Lease)!;
        var b = s.ClaimNextFrame("b", "b", Lease)!;
        Assert.Equal((1, 2, 1), (a.Seq, b.Seq, a.Frame.Attempts));
        Assert.False(s.CompleteFrame(a with { Owner = "b" }, Result(a)));
        Assert.False(s.RenewClaim(a with { Owner = "b" }, Lease));
        Assert.True(s.RenewClaim(a, Lease));
        Assert.True(s.CompleteFrame(a, Result(a, 2.5f)));
        Assert.False(s.CompleteFrame(a, Result(a, 9f)));
        Assert.False(s.RenewClaim(a, Lease));
        Assert.True(s.FailFrame(b, "frame-unreadable: broken"));
        Assert.False(s.FailFrame(b, "again"));
        Assert.False(s.FinishIfComplete("b")); // frame 3 is still open
        var batch = s.Get("b")!;
        Assert.Equal((1, 1, 1), (batch.DoneCount, batch.FailedCount, batch.PendingCount));
        Assert.Equal(2.5f, s.Frame("b", 1)!.FrameScore);
        Assert.Equal(FrameStates.Failed, s.Frame("b", 2)!.State);
        var c = s.ClaimNextFrame("b", "a", Lease)!;
        Assert.Equal(3, c.Seq);
        Assert.Null(s.ClaimNextFrame("b", "b", Lease));
        Assert.True(s.CompleteFrame(c, Result(c)));
        Assert.True(s.FinishIfComplete("b"));
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void An_expired_claim_is_taken_over_and_the_late_writer_is_refused(string engine)
    {
        var s = Open(engine).Batches;
        s.Submit("b", "m", "folder:x", null, Frames(2));
        Run(s, "b");
        var dead = s.ClaimNextFrame("b", "dead", TimeSpan.FromMilliseconds(200))!;
        var other = s.ClaimNextFrame("b", "live", Lease)!;
        Assert.Equal(2, other.Seq); // frame 1 is held
        Thread.Sleep(600);
        var taken = s.ClaimNextFrame("b", "live", Lease)!;
        Assert.Equal((1, 2), (taken.Seq, taken.Frame.Attempts));
        Assert.False(s.RenewClaim(dead, Lease));
        Assert.False(s.CompleteFrame(dead, Result(dead, 7f)));
        Assert.True(s.CompleteFrame(taken, Result(taken, 3f)));
        Assert.True(s.CompleteFrame(other, Result(other)));
        Assert.Equal(3f, s.Frame("b", 1)!.FrameScore);
        Assert.Equal(2, s.Get("b")!.DoneCount);
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void Concurrent_claimers_take_every_frame_exactly_once(string engine)
    {
        var s = Open(engine).Batches;
        const int n = 40;
        s.Submit("b", "m", "folder:x", null, Frames(n));
        Run(s, "b");
        var done = new System.Collections.Concurrent.ConcurrentBag<(string Owner, int Seq)>();
        Parallel.For(0, 4, new ParallelOptions { MaxDegreeOfParallelism = 4 }, w =>
        {
            string owner = "w" + w;
            while (s.ClaimNextFrame("b", owner, Lease) is { } c)
                if (s.CompleteFrame(c, Result(c))) done.Add((owner, c.Seq));
        });
        Assert.Equal(Enumerable.Range(1, n), done.Select(d => d.Seq).Order());
        Assert.Equal(n, s.Get("b")!.DoneCount);
        Assert.All(s.Frames("b"), f => Assert.Equal(1, f.Attempts));
        Assert.True(s.FinishIfComplete("b"));
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void Transitions_move_only_from_the_given_states_and_a_cancelled_batch_gives_no_frames(string engine)
    {
        var s = Open(engine).Batches;
        s.Submit("b", "m", "folder:x", "https://hook.example/done", Frames(2));
        Assert.False(s.Transition("b", BatchStates.Done, [BatchStates.Running]));
        Run(s, "b");
        Assert.True(s.Transition("b", BatchStates.Cancelled, [BatchStates.Queued, BatchStates.Running], error: "stopped by a person"));
        Assert.Null(s.ClaimNextFrame("b", "a", Lease));
        Assert.False(s.FinishIfComplete("b"));
        var b = s.Get("b")!;
        Assert.Equal((BatchStates.Cancelled, "stopped by a person", CallbackStates.Pending), (b.State, b.Error, b.CallbackState));
        Assert.Equal(["b"], s.CallbacksDue().Select(x => x.Id));
        Assert.True(s.ClaimCallback("b", "a", Lease));
        Assert.False(s.ClaimCallback("b", "b", Lease)); // one replica delivers
        Assert.True(s.ClaimCallback("b", "a", Lease));
        s.RecordCallback("b", CallbackStates.Delivered, 1);
        Assert.False(s.ClaimCallback("b", "a", Lease));
        Assert.Empty(s.CallbacksDue());
        Assert.Empty(s.Runnable());
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void Scored_frames_index_their_regions(string engine)
    {
        var s = Open(engine).Batches;
        s.Submit("b", "m", "folder:x", null, Frames(3));
        Run(s, "b");
        ManifestRegion[][] regions = [[Region(1, "apron", 4f), Region(2, "grass", float.PositiveInfinity)], [], [Region(1, "apron", 2.5f)]];
        foreach (var r in regions)
        {
            var c = s.ClaimNextFrame("b", "a", Lease)!;
            Assert.True(s.CompleteFrame(c, Result(c, 3f, r)));
        }
        Assert.Equal([(1, 1, "apron", 4f), (1, 2, "grass", float.PositiveInfinity), (3, 1, "apron", 2.5f)],
            s.RegionBriefs("b").Select(b => (b.Seq, b.Region, b.ClassBeneathName, b.MaxScore)));
        Assert.Equal([(1, 2), (2, 0), (3, 1)], s.FrameSummaries("b").Select(f => (f.Seq, f.RegionCount ?? -1)));
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void A_decision_replaces_the_last_one_on_its_target_and_the_log_keeps_every_write(string engine)
    {
        var db = Open(engine);
        var s = db.Batches;
        s.Submit("b", "m", "folder:x", null, Frames(2));
        Run(s, "b");
        for (int i = 0; i < 2; i++) { var c = s.ClaimNextFrame("b", "a", Lease)!; s.CompleteFrame(c, Result(c, 3f, Region(1, "apron", 4f))); }
        var d = db.Decisions;
        var first = d.Decide("b", 1, 1, Verdicts.Unsure, "first look", "ann");
        var second = d.Decide("b", 1, 1, Verdicts.LabelIt, null, "bo");
        d.Decide("b", 2, null, Verdicts.FalseAlarm, null, "ann");
        Assert.True(second.Revision > first.Revision);
        Assert.Equal((Verdicts.LabelIt, (string?)null, "bo", "f001.png"), (second.Verdict, second.Note, second.DecidedBy, second.FrameId));
        Assert.Equal([(1, (int?)1), (2, null)], d.Current("b").Select(x => (x.Seq, x.Region)));
        Assert.Equal([(2, (int?)null)], d.Current("b", 2).Select(x => (x.Seq, x.Region)));
        Assert.True(d.Withdraw("b", 1, 1, "bo"));
        Assert.False(d.Withdraw("b", 1, 1, "bo"));
        var log = d.Log("b");
        Assert.Equal([Verdicts.Unsure, Verdicts.LabelIt, Verdicts.FalseAlarm, null], log.Select(e => e.Verdict));
        Assert.Equal(log.Select(e => e.Revision).Order(), log.Select(e => e.Revision));
        Assert.Equal(2, d.Log("b", after: log[1].Revision).Count);
        Assert.Single(d.Current("b"));
    }

    private static JobRecord Job(string id, int minute, string state = "queued") =>
        new("calibration", id, state, new DateTimeOffset(2026, 12, 2, 10, minute, 0, TimeSpan.Zero), $"{{\"id\":\"{id}\",\"state\":\"{state}\"}}");

    [Theory, InlineData("sqlite"), PostgresData]
    public void Jobs_are_added_once_listed_newest_first_and_kept_apart_by_kind(string engine)
    {
        var j = Open(engine).Jobs;
        Assert.True(j.Add(Job("old", 1)));
        Assert.True(j.Add(Job("new", 2)));
        Assert.False(j.Add(Job("old", 3, "done"))); // an existing job is left as it is
        Assert.True(j.Add(Job("old", 1) with { Kind = "evaluation" }));
        Assert.Equal(["new", "old"], j.List("calibration").Select(x => x.Id));
        var old = j.Get("calibration", "old")!;
        Assert.Equal(("queued", Job("old", 1).Created, Job("old", 1).Body), (old.State, old.Created, old.Body));
        Assert.Single(j.List("evaluation"));
        Assert.Null(j.Get("evaluation", "new"));
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void A_job_is_run_by_one_claimer_at_a_time_and_taken_over_after_its_lease(string engine)
    {
        var j = Open(engine).Jobs;
        string[] runnable = ["queued", "running"];
        j.Add(Job("a", 1));
        j.Add(Job("b", 2));
        j.Add(Job("c", 3, "done"));
        var dead = j.ClaimNext("calibration", runnable, "dead", TimeSpan.FromMilliseconds(200))!;
        Assert.Equal("a", dead.Id); // oldest first
        Assert.True(j.Save(dead with { State = "running" }, "dead"));
        var live = j.ClaimNext("calibration", runnable, "live", Lease)!;
        Assert.Equal("b", live.Id); // a is held
        Assert.Null(j.ClaimNext("calibration", runnable, "third", Lease)); // c is finished
        Assert.False(j.Save(live with { State = "failed" }, "dead")); // not the holder
        Thread.Sleep(600);
        var taken = j.ClaimNext("calibration", runnable, "live", Lease)!;
        Assert.Equal(("a", "running"), (taken.Id, taken.State));
        Assert.False(j.Renew("calibration", "a", "dead", Lease));
        Assert.False(j.Save(taken with { State = "done" }, "dead")); // the late writer is refused
        Assert.True(j.Renew("calibration", "a", "live", Lease));
        Assert.True(j.Save(taken with { State = "done" }, "live", release: true));
        Assert.Equal("done", j.Get("calibration", "a")!.State);
        Assert.True(j.Save(j.Get("calibration", "a")! with { State = "activated" }, "anyone")); // released: any replica may write
        Assert.True(j.Save(live with { State = "running" }, "live", release: true)); // handed back unfinished: free to take at once
        Assert.Equal("b", j.ClaimNext("calibration", runnable, "third", Lease)!.Id);
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void Concurrent_claimers_take_each_job_once(string engine)
    {
        var j = Open(engine).Jobs;
        for (int i = 0; i < 20; i++) j.Add(Job($"j{i:D2}", i));
        var taken = new System.Collections.Concurrent.ConcurrentBag<string>();
        Parallel.For(0, 4, w =>
        {
            while (j.ClaimNext("calibration", ["queued"], $"w{w}", Lease) is { } job) taken.Add(job.Id);
        });
        Assert.Equal(Enumerable.Range(0, 20).Select(i => $"j{i:D2}"), taken.Order(StringComparer.Ordinal));
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void A_track_decision_is_kept_apart_from_region_decisions_logged_once_and_laid_on_its_region_when_later(string engine)
    {
        var db = Open(engine);
        var s = db.Batches;
        s.Submit("b", "m", "folder:x", null, Frames(1));
        Run(s, "b");
        var c = s.ClaimNextFrame("b", "a", Lease)!;
        s.CompleteFrame(c, Result(c, 3f, Region(1, "apron", 4f), Region(2, "apron", 5f)));
        var d = db.Decisions;
        var region = d.Decide("b", 1, 2, Verdicts.FalseAlarm, null, "ann");
        var track = d.DecideTrack("b", 1, 2, Verdicts.LabelIt, "whole pass", "bo");
        d.DecideTrack("b", 1, 1, Verdicts.Unsure, null, "bo");
        Assert.Equal((2, (int?)null, Verdicts.LabelIt, "whole pass", "f001.png"), (track.Track!.Value, track.Region, track.Verdict, track.Note, track.FrameId));
        Assert.True(track.Revision > region.Revision);
        // Region decisions and track decisions are read apart; the region's own decision is still stored.
        Assert.Equal([(1, (int?)2, (int?)null)], d.Current("b").Select(x => (x.Seq, x.Region, x.Track)));
        Assert.Equal([1, 2], d.CurrentTracks("b").Select(x => x.Track!.Value));
        Assert.Equal([1, 2], d.CurrentTracks("b", 1).Select(x => x.Track!.Value));
        // Effective: the later write wins on region 2 (the track), and track 1 stands in for region 1.
        Assert.Equal([(1, Verdicts.Unsure, (int?)1), (2, Verdicts.LabelIt, (int?)2)], d.Effective("b").Select(x => (x.Region!.Value, x.Verdict, x.Track)));
        var later = d.Decide("b", 1, 2, Verdicts.FalseAlarm, "not this one", "ann");
        Assert.Equal((Verdicts.FalseAlarm, (int?)null), d.Effective("b", 1).Where(x => x.Region == 2).Select(x => (x.Verdict, x.Track)).Single());
        Assert.True(d.WithdrawTrack("b", 1, 2, "bo"));
        Assert.False(d.WithdrawTrack("b", 1, 2, "bo"));
        Assert.Equal([1], d.CurrentTracks("b").Select(x => x.Track!.Value));
        // One log entry per track write (withdrawal included), beside the region entries, in revision order.
        var log = d.Log("b");
        Assert.Equal([(2, (int?)null), (null, 2), (null, 1), (2, null), (null, 2)], log.Select(e => (e.Region, e.Track)));
        Assert.Equal([Verdicts.FalseAlarm, Verdicts.LabelIt, Verdicts.Unsure, Verdicts.FalseAlarm, null], log.Select(e => e.Verdict));
        Assert.Equal(later.Revision, log[3].Revision);
    }

    [Theory, InlineData("sqlite"), PostgresData]
    public void Both_engines_reach_the_same_schema_version_and_reopening_changes_nothing(string engine)
    {
        var db = Open(engine);
        db.Batches.Submit("b", "m", "folder:x", null, Frames(1));
        int version = engine == BatchDatabase.Sqlite
            ? new SqliteDatabase(Path.Combine(_folder, "batches.db"), TimeProvider.System).Using(x => x.SchemaVersion)
            : SchemaOf(db);
        Assert.Equal(StoreSchema.Latest, version);
        Assert.Equal(Enumerable.Range(1, StoreSchema.Latest), StoreSchema.Versions.Select(v => v.Version));
        Assert.Equal(1, db.Batches.Get("b")!.FrameCount);
    }

    private int SchemaOf(BatchDatabase db)
    {
        // A second open of the same database runs no step again and agrees on the version.
        using var again = new PostgresDatabase(ConnectionOf(db), TimeProvider.System);
        return again.SchemaVersion;
    }

    private string ConnectionOf(BatchDatabase db) =>
        postgres.Cluster.ConnectionString(db.Describe[(db.Describe.LastIndexOf('/') + 1)..]);

    public void Dispose()
    {
        foreach (var db in _open) db.Dispose();
        Microsoft.Data.Sqlite.SqliteConnection.ClearAllPools();
        try { Directory.Delete(_folder, recursive: true); } catch (IOException) { }
    }
}

internal static class DisposableExtensions
{
    public static T Using<TD, T>(this TD d, Func<TD, T> f) where TD : IDisposable
    {
        using (d) return f(d);
    }
}
