using System.Net;
using System.Net.Http.Json;
using System.Text.Json;
using Strayspot.Tests.Support;
using Xunit.Abstractions;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Review;

/// <summary>
/// Decisions on whole tracks of a recording, through the HTTP API of a real Kestrel on 127.0.0.1, with a video
/// encoded by ffmpeg in the test. One service serves the class (started on first use, so a missing ffmpeg skips
/// every test before any start); each test works on its own tracks or only reads.
/// </summary>
public sealed class TrackDecisionApiTests(TrackDecisionApiTests.SharedKit shared, ITestOutputHelper output) : IClassFixture<TrackDecisionApiTests.SharedKit>
{
    public sealed class SharedKit : IAsyncDisposable
    {
        private readonly SemaphoreSlim _gate = new(1, 1);
        private TrackReviewKit? _kit;

        public async Task<TrackReviewKit> GetAsync()
        {
            await _gate.WaitAsync();
            try { return _kit ??= await TrackReviewKit.StartAsync(); }
            finally { _gate.Release(); }
        }

        public async ValueTask DisposeAsync()
        {
            if (_kit is not null) await _kit.DisposeAsync();
        }
    }

    private static string Base => $"/v1/batches/{TrackReviewKit.Batch}/frames";

    private static async Task<JsonElement> PutAsync(HttpClient http, string path, object body, HttpStatusCode expected = HttpStatusCode.OK)
    {
        var r = await http.PutAsJsonAsync(path, body);
        string text = await r.Content.ReadAsStringAsync();
        Assert.True(expected == r.StatusCode, $"PUT {path}: expected {(int)expected}, got {(int)r.StatusCode}: {text}");
        return text.Length == 0 ? default : JsonDocument.Parse(text).RootElement;
    }

    private static async Task AssertProblemAsync(HttpResponseMessage r, HttpStatusCode status, string code, string? detailHas = null)
    {
        string text = await r.Content.ReadAsStringAsync();
        Assert.True(status == r.StatusCode, $"expected {(int)status} {code}, got {(int)r.StatusCode}: {text}");
        Assert.Equal("application/problem+json", r.Content.Headers.ContentType?.MediaType);
        var problem = JsonDocument.Parse(text).RootElement;
        Assert.Equal(code, problem.GetProperty("code").GetString());
        if (detailHas is not null) Assert.Contains(detailHas, problem.GetProperty("detail").GetString());
    }

    private static JsonElement RegionOf(JsonElement line, int id) =>
        line.GetProperty("regions").EnumerateArray().Single(r => r.GetProperty("id").GetInt32() == id);

    private static List<int> KeptTracks(JsonElement recording) =>
        recording.GetProperty("tracks").EnumerateArray().Select(t => t.GetProperty("id").GetInt32()).ToList();

    [VideoFact]
    public async Task The_recording_view_holds_the_timeline_threshold_and_kept_tracks_with_their_facts_and_best_frames()
    {
        var kit = await shared.GetAsync();
        var rec = await kit.RecordingAsync();
        var tracksJson = JsonDocument.Parse(File.ReadAllText(Path.Combine(kit.Root, "data", "batches", TrackReviewKit.Batch,
            (await kit.VideoLineAsync()).GetProperty("artifacts").GetProperty("tracks").GetString()!))).RootElement;
        // The strip's points are the sampled frames' times and scores from frames.jsonl, one per frame scored.
        int scored = tracksJson.GetProperty("framesScored").GetInt32();
        Assert.Equal(17, scored);
        Assert.Equal(scored, rec.GetProperty("times").GetArrayLength());
        Assert.Equal(scored, rec.GetProperty("scores").GetArrayLength());
        Assert.False(rec.GetProperty("pointsMerged").GetBoolean());
        Assert.Equal(tracksJson.GetProperty("threshold").GetSingle(), rec.GetProperty("threshold").GetSingle());
        Assert.Equal(0.0, rec.GetProperty("startSeconds").GetDouble(), 3);
        Assert.Equal(1.6, rec.GetProperty("endSeconds").GetDouble(), 3);
        // Kept tracks only, with the facts tracks.json gives them.
        var kept = tracksJson.GetProperty("tracks").EnumerateArray().Where(t => t.GetProperty("kept").GetBoolean()).ToList();
        Assert.NotEmpty(kept);
        Assert.Equal(kept.Select(t => t.GetProperty("id").GetInt32()).Order(), KeptTracks(rec).Order());
        foreach (var t in rec.GetProperty("tracks").EnumerateArray())
        {
            var k = kept.Single(x => x.GetProperty("id").GetInt32() == t.GetProperty("id").GetInt32());
            foreach (string f in new[] { "firstTime", "lastTime", "bestTime" }) Assert.Equal(k.GetProperty(f).GetDouble(), t.GetProperty(f).GetDouble());
            foreach (string f in new[] { "framesSeen" }) Assert.Equal(k.GetProperty(f).GetInt32(), t.GetProperty(f).GetInt32());
            foreach (string f in new[] { "maxScore", "meanScore" }) Assert.Equal(k.GetProperty(f).GetSingle(), t.GetProperty(f).GetSingle());
            Assert.Equal(k.GetProperty("classBeneathName").GetString(), t.GetProperty("classBeneathName").GetString());
        }
        var first = rec.GetProperty("tracks")[0];
        var png = await kit.Http.GetAsync(first.GetProperty("best").GetString());
        Assert.Equal(HttpStatusCode.OK, png.StatusCode);
        Assert.Equal("image/png", png.Content.Headers.ContentType?.MediaType);
        Assert.Equal(new byte[] { 0x89, (byte)'P', (byte)'N', (byte)'G' }, (await png.Content.ReadAsByteArrayAsync())[..4]);

        // The frame route points a recording to its timeline instead of frame images.
        var frame = await GetAsync(kit.Http, $"{Base}/{kit.VideoSeq}");
        Assert.Equal($"{Base}/{kit.VideoSeq}/recording", frame.GetProperty("recording").GetString());
        Assert.False((await GetAsync(kit.Http, $"{Base}/{kit.StillSeq}")).TryGetProperty("recording", out _));
    }

    [VideoFact]
    public async Task A_decision_on_a_track_lands_on_its_regions_in_the_manifest_is_logged_once_and_the_later_write_wins()
    {
        var kit = await shared.GetAsync();
        var tracks = KeptTracks(await kit.RecordingAsync());
        int track = tracks[0];
        long before = (await GetAsync(kit.Http, $"/v1/batches/{TrackReviewKit.Batch}/decisions/log")).GetProperty("entries").EnumerateArray()
            .Select(e => e.GetProperty("revision").GetInt64()).DefaultIfEmpty(0).Max();

        var stored = await PutAsync(kit.Http, $"{Base}/{kit.VideoSeq}/tracks/{track}/decision", new { verdict = "label-it", note = "debris, whole pass", reviewer = "ann" });
        Assert.Equal(track, stored.GetProperty("track").GetInt32());
        Assert.Equal(JsonValueKind.Null, stored.GetProperty("region").ValueKind);
        Assert.Equal(TrackReviewKit.Video, stored.GetProperty("frameId").GetString());

        // Every region of the track carries the decision, marked with the track it came from; other regions none.
        var line = await kit.VideoLineAsync();
        var mark = RegionOf(line, track).GetProperty("decision");
        Assert.Equal(("label-it", "debris, whole pass", "ann", track),
            (mark.GetProperty("verdict").GetString(), mark.GetProperty("note").GetString(), mark.GetProperty("decidedBy").GetString(), mark.GetProperty("track").GetInt32()));
        foreach (int other in tracks.Skip(1)) Assert.False(RegionOf(line, other).TryGetProperty("decision", out _), $"track {other}");
        Assert.False(line.TryGetProperty("decision", out _));
        // Where the manifest also lists the recording's sampled frames (kind recording-frame), each of their regions
        // that joined the track carries the decision too, and no other region does.
        var frameLines = (await ManifestAsync(kit.Http, TrackReviewKit.Batch)).Where(l =>
            l.TryGetProperty("kind", out var k) && k.GetString() == "recording-frame" && l.GetProperty("recording").GetString() == TrackReviewKit.Video).ToList();
        int sightings = 0;
        foreach (var r in frameLines.SelectMany(l => l.GetProperty("regions").EnumerateArray()))
        {
            bool onTrack = r.TryGetProperty("track", out var t) && t.ValueKind == JsonValueKind.Number && t.GetInt32() == track;
            bool marked = r.TryGetProperty("decision", out var m) && m.TryGetProperty("track", out var mt) && mt.GetInt32() == track;
            Assert.Equal(onTrack, marked);
            if (onTrack) { sightings++; Assert.Equal("label-it", m.GetProperty("verdict").GetString()); }
        }
        output.WriteLine($"{frameLines.Count} recording-frame line(s), {sightings} region(s) of track {track} marked there");
        // The manifest file in the batch folder says the same once rewritten, and the labeling queue's filter finds it.
        var labeled = await kit.Http.GetStringAsync($"/v1/batches/{TrackReviewKit.Batch}/manifest?verdict=label-it");
        Assert.Contains(TrackReviewKit.Video, labeled);

        // Logged once: one entry, for the track, whatever the number of frames it spans.
        var log = (await GetAsync(kit.Http, $"/v1/batches/{TrackReviewKit.Batch}/decisions/log?after={before}")).GetProperty("entries").EnumerateArray().ToList();
        var entry = Assert.Single(log);
        Assert.Equal((track, JsonValueKind.Null, "label-it"), (entry.GetProperty("track").GetInt32(), entry.GetProperty("region").ValueKind, entry.GetProperty("verdict").GetString()));
        var decided = (await GetAsync(kit.Http, $"/v1/batches/{TrackReviewKit.Batch}/decisions")).GetProperty("decisions").EnumerateArray()
            .Single(d => d.GetProperty("seq").GetInt32() == kit.VideoSeq && d.GetProperty("region").GetInt32() == track);
        Assert.Equal(track, decided.GetProperty("track").GetInt32());
        var item = (await GetAsync(kit.Http, $"/v1/batches/{TrackReviewKit.Batch}/review")).GetProperty("frames").EnumerateArray()
            .Single(f => f.GetProperty("seq").GetInt32() == kit.VideoSeq);
        Assert.True(item.GetProperty("regionsDecided").GetInt32() >= 1);

        // A region decision written later wins on that region; the track decision written after it wins again.
        await PutAsync(kit.Http, $"{Base}/{kit.VideoSeq}/regions/{track}/decision", new { verdict = "false-alarm" });
        mark = RegionOf(await kit.VideoLineAsync(), track).GetProperty("decision");
        Assert.Equal("false-alarm", mark.GetProperty("verdict").GetString());
        Assert.False(mark.TryGetProperty("track", out _));
        await PutAsync(kit.Http, $"{Base}/{kit.VideoSeq}/tracks/{track}/decision", new { verdict = "unsure" });
        mark = RegionOf(await kit.VideoLineAsync(), track).GetProperty("decision");
        Assert.Equal(("unsure", track), (mark.GetProperty("verdict").GetString(), mark.GetProperty("track").GetInt32()));
        var view = (await kit.RecordingAsync()).GetProperty("tracks").EnumerateArray().Single(t => t.GetProperty("id").GetInt32() == track);
        Assert.Equal("unsure", view.GetProperty("decision").GetProperty("verdict").GetString());
        Assert.Equal("false-alarm", view.GetProperty("regionDecision").GetProperty("verdict").GetString());

        // Withdrawing the track decision shows the region's own again; a second withdrawal finds nothing.
        Assert.Equal(HttpStatusCode.NoContent, (await kit.Http.DeleteAsync($"{Base}/{kit.VideoSeq}/tracks/{track}/decision")).StatusCode);
        Assert.Equal("false-alarm", RegionOf(await kit.VideoLineAsync(), track).GetProperty("decision").GetProperty("verdict").GetString());
        await AssertProblemAsync(await kit.Http.DeleteAsync($"{Base}/{kit.VideoSeq}/tracks/{track}/decision"), HttpStatusCode.NotFound, "not-found");
    }

    [VideoFact]
    public async Task A_track_that_is_not_there_is_404_track_not_found_and_bad_bodies_are_400()
    {
        var kit = await shared.GetAsync();
        var kept = KeptTracks(await kit.RecordingAsync());
        foreach (int bad in new[] { 0, -1, 9999 })
        {
            await AssertProblemAsync(await kit.Http.PutAsJsonAsync($"{Base}/{kit.VideoSeq}/tracks/{bad}/decision", new { verdict = "label-it" }),
                HttpStatusCode.NotFound, "track-not-found", $"kept tracks are {kept[0]}");
            await AssertProblemAsync(await kit.Http.GetAsync($"{Base}/{kit.VideoSeq}/tracks/{bad}/best"), HttpStatusCode.NotFound, "track-not-found");
            await AssertProblemAsync(await kit.Http.DeleteAsync($"{Base}/{kit.VideoSeq}/tracks/{bad}/decision"), HttpStatusCode.NotFound, "track-not-found");
        }
        // A track found but left out by the persistence rule is named as such.
        var tracksJson = JsonDocument.Parse(File.ReadAllText(Path.Combine(kit.Root, "data", "batches", TrackReviewKit.Batch,
            (await kit.VideoLineAsync()).GetProperty("artifacts").GetProperty("tracks").GetString()!))).RootElement;
        var dropped = tracksJson.GetProperty("tracks").EnumerateArray().Where(t => !t.GetProperty("kept").GetBoolean()).Select(t => t.GetProperty("id").GetInt32()).ToList();
        Assert.NotEmpty(dropped);
        await AssertProblemAsync(await kit.Http.PutAsJsonAsync($"{Base}/{kit.VideoSeq}/tracks/{dropped[0]}/decision", new { verdict = "label-it" }),
            HttpStatusCode.NotFound, "track-not-found", "persistence rule");

        await AssertProblemAsync(await kit.Http.PutAsJsonAsync($"{Base}/{kit.VideoSeq}/tracks/{kept[^1]}/decision", new { verdict = "maybe" }),
            HttpStatusCode.BadRequest, "validation-failed");
        await AssertProblemAsync(await kit.Http.PutAsJsonAsync($"{Base}/{kit.VideoSeq}/tracks/{kept[^1]}/decision", new { verdict = "unsure", note = new string('x', 2001) }),
            HttpStatusCode.BadRequest, "note-too-long");
        await AssertProblemAsync(await kit.Http.PutAsJsonAsync($"/v1/batches/no-such/frames/{kit.VideoSeq}/tracks/{kept[0]}/decision", new { verdict = "unsure" }),
            HttpStatusCode.NotFound, "batch-not-found");
        await AssertProblemAsync(await kit.Http.PutAsJsonAsync($"{Base}/99/tracks/{kept[0]}/decision", new { verdict = "unsure" }),
            HttpStatusCode.NotFound, "frame-not-found");
        // Nothing refused reached the store's log.
        var log = (await GetAsync(kit.Http, $"/v1/batches/{TrackReviewKit.Batch}/decisions/log")).GetProperty("entries").EnumerateArray();
        Assert.DoesNotContain(log, e => e.TryGetProperty("track", out var t) && (t.GetInt32() == 9999 || t.GetInt32() == dropped[0] || t.GetInt32() == kept[^1]));
    }

    [VideoFact]
    public async Task A_track_of_a_still_frame_is_409_not_a_recording()
    {
        var kit = await shared.GetAsync();
        var r = await kit.Http.PutAsJsonAsync($"{Base}/{kit.StillSeq}/tracks/1/decision", new { verdict = "label-it" });
        await AssertProblemAsync(r, HttpStatusCode.Conflict, "not-a-recording", TrackReviewKit.Still);
        await AssertProblemAsync(await kit.Http.GetAsync($"{Base}/{kit.StillSeq}/recording"), HttpStatusCode.Conflict, "not-a-recording");
        await AssertProblemAsync(await kit.Http.GetAsync($"{Base}/{kit.StillSeq}/tracks/1/best"), HttpStatusCode.Conflict, "not-a-recording");
        await AssertProblemAsync(await kit.Http.DeleteAsync($"{Base}/{kit.StillSeq}/tracks/1/decision"), HttpStatusCode.Conflict, "not-a-recording");
        // The still frame's regions are untouched by any track decision.
        var still = (await ManifestAsync(kit.Http, TrackReviewKit.Batch)).Single(l => l.GetProperty("frameId").GetString() == TrackReviewKit.Still);
        Assert.All(still.GetProperty("regions").EnumerateArray(), reg => Assert.False(reg.TryGetProperty("decision", out var d) && d.TryGetProperty("track", out _)));
    }
}
