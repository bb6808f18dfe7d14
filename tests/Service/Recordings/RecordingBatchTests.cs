using System.Net;
using System.Net.Http.Headers;
using System.Net.Http.Json;
using System.Text.Json;
using Strayspot.Service.Demo;
using Strayspot.Tests.Support;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Recordings;

/// <summary>A folder holding a video and a frame, submitted through the HTTP batch API of a real Kestrel.</summary>
public class RecordingBatchTests
{
    [VideoFact]
    public async Task A_video_in_a_batch_folder_gives_a_recording_line_and_a_timestamped_line_per_sampled_frame()
    {
        await using var s = await StartAsync();
        string folder = Path.Combine(s.DataRoot, "rig");
        WriteFrames(folder, 1);
        // A short drive-by at the batch kit's frame size: 9 frames of 256×128.
        var drive = new ApronDriveBy(frameWidth: 256, frameHeight: 128, panoramaWidth: 384, step: 16, debris: 3);
        VideoFiles.EncodeMp4(Path.Combine(folder, "pass.mp4"), 256, 128, drive.FrameRate, Enumerable.Range(0, drive.FrameCount).Select(drive.Rgb));

        var created = await PostFolderAsync(s.Client, "rig", batchId: "rig-1");
        Assert.Equal(2, created.GetProperty("framesAdded").GetInt32());
        await WaitForStateAsync(s.Client, "rig-1", "done");
        var lines = await ManifestAsync(s.Client, "rig-1");
        var video = Assert.Single(lines, l => l.GetProperty("frameId").GetString() == "pass.mp4");
        Assert.Equal("recording", video.GetProperty("kind").GetString());
        Assert.False(video.TryGetProperty("error", out _));
        string batchFolder = Path.Combine(s.DataRoot, "batches", "rig-1");
        var artifacts = video.GetProperty("artifacts");
        foreach (string key in new[] { "tracks", "frames", "plot" })
            Assert.True(File.Exists(Path.Combine(batchFolder, artifacts.GetProperty(key).GetString()!)), key);
        var tracks = JsonDocument.Parse(File.ReadAllText(Path.Combine(batchFolder, artifacts.GetProperty("tracks").GetString()!))).RootElement;
        Assert.Equal(drive.FrameCount, tracks.GetProperty("framesScored").GetInt32());
        var kept = tracks.GetProperty("tracks").EnumerateArray().Where(t => t.GetProperty("kept").GetBoolean()).Select(t => t.GetProperty("id").GetInt32()).ToList();
        Assert.NotEmpty(kept);
        Assert.Equal(kept, video.GetProperty("regions").EnumerateArray().Select(r => r.GetProperty("id").GetInt32()).ToList());
        // The recording line sums up every track and the ranked segments, under the manifest's frame ids.
        var timeline = video.GetProperty("timeline");
        var spans = timeline.GetProperty("tracks").EnumerateArray().ToDictionary(t => t.GetProperty("id").GetInt32());
        Assert.Equal(tracks.GetProperty("tracks").GetArrayLength(), spans.Count);
        Assert.Equal(kept, spans.Values.Where(t => t.GetProperty("kept").GetBoolean()).Select(t => t.GetProperty("id").GetInt32()));
        Assert.All(spans.Values, t => Assert.False(t.TryGetProperty("sightings", out _)));
        Assert.All(spans.Values, t => Assert.True(File.Exists(Path.Combine(batchFolder, t.GetProperty("bestOverlay").GetString()!))));
        var segments = timeline.GetProperty("segments").EnumerateArray().ToList();
        Assert.Equal(Enumerable.Range(1, segments.Count), segments.Select(g => g.GetProperty("rank").GetInt32()));
        Assert.All(segments, g => Assert.StartsWith("pass.mp4@", g.GetProperty("bestFrameId").GetString()));

        // Right after it, one line per sampled frame in time order: frame i at i / 10 s, each region naming its track.
        int at = lines.IndexOf(video);
        var frames = lines.Skip(at + 1).Take(drive.FrameCount).ToList();
        Assert.All(frames, f => Assert.Equal("recording-frame", f.GetProperty("kind").GetString()));
        Assert.All(frames, f => Assert.Equal("pass.mp4", f.GetProperty("recording").GetString()));
        Assert.All(frames, f => Assert.Equal(video.GetProperty("seq").GetInt32(), f.GetProperty("seq").GetInt32()));
        Assert.Equal(Enumerable.Range(0, drive.FrameCount).Select(i => (long)i), frames.Select(f => f.GetProperty("index").GetInt64()));
        Assert.Equal(Enumerable.Range(0, drive.FrameCount).Select(i => $"pass.mp4@{i:D6}"), frames.Select(f => f.GetProperty("frameId").GetString()));
        Assert.Equal(Enumerable.Range(0, drive.FrameCount).Select(i => i / 10.0), frames.Select(f => Math.Round(f.GetProperty("timeSeconds").GetDouble(), 3)));
        var sightings = tracks.GetProperty("tracks").EnumerateArray().SelectMany(t => t.GetProperty("sightings").EnumerateArray()
            .Select(g => (Frame: g.GetProperty("index").GetInt64(), Region: g.GetProperty("region").GetInt32(), Track: t.GetProperty("id").GetInt32()))).ToHashSet();
        var regions = frames.SelectMany(f => f.GetProperty("regions").EnumerateArray()
            .Select(r => (Frame: f.GetProperty("index").GetInt64(), Region: r.GetProperty("id").GetInt32(), Track: r.GetProperty("track").GetInt32()))).ToHashSet();
        Assert.Equal(sightings, regions);
        Assert.All(frames.SelectMany(f => f.GetProperty("regions").EnumerateArray()), r => Assert.True(r.GetProperty("outline").GetArrayLength() >= 3));
        // A frame inside a segment's span names the segment's rank.
        foreach (var f in frames)
        {
            double t = f.GetProperty("timeSeconds").GetDouble();
            var inside = segments.FirstOrDefault(g => t >= g.GetProperty("startSeconds").GetDouble() && t <= g.GetProperty("endSeconds").GetDouble());
            Assert.Equal(inside.ValueKind == JsonValueKind.Undefined ? null : inside.GetProperty("rank").GetInt32(),
                f.TryGetProperty("segment", out var seg) ? seg.GetInt32() : (int?)null);
        }

        // A decision on a track (region N of the recording) shows on every frame region that joined it, and the verdict filter keeps those lines.
        int seq = video.GetProperty("seq").GetInt32(), track = kept[0];
        var put = await s.Client.PutAsJsonAsync($"/v1/batches/rig-1/frames/{seq}/regions/{track}/decision", new { verdict = "label-it" });
        Assert.True(put.IsSuccessStatusCode, await put.Content.ReadAsStringAsync());
        var decided = (await ManifestAsync(s.Client, "rig-1")).Where(l => l.GetProperty("kind").GetString() == "recording-frame").ToList();
        foreach (var r in decided.SelectMany(f => f.GetProperty("regions").EnumerateArray()))
            Assert.Equal(r.GetProperty("track").GetInt32() == track, r.TryGetProperty("decision", out var d) && d.GetProperty("verdict").GetString() == "label-it");
        var filtered = (await s.Client.GetStringAsync("/v1/batches/rig-1/manifest?verdict=label-it"))
            .Split('\n', StringSplitOptions.RemoveEmptyEntries).Select(l => JsonDocument.Parse(l).RootElement).ToList();
        Assert.Equal("recording", filtered[0].GetProperty("kind").GetString());
        Assert.Equal(sightings.Where(g => g.Track == track).Select(g => g.Frame).Order(),
            filtered.Skip(1).Select(f => f.GetProperty("index").GetInt64()));
    }

    [VideoFact]
    public async Task A_video_uploaded_on_its_own_is_a_batch_of_one_recording()
    {
        await using var s = await StartAsync();
        var drive = new ApronDriveBy(frameWidth: 256, frameHeight: 128, panoramaWidth: 320, step: 16, debris: 2);
        string mp4 = Path.Combine(s.DataRoot, "upload.mp4");
        VideoFiles.EncodeMp4(mp4, 256, 128, drive.FrameRate, Enumerable.Range(0, drive.FrameCount).Select(drive.Rgb));
        using var content = new MultipartFormDataContent();
        content.Add(new StringContent(Model), "model");
        content.Add(new StringContent("up-1"), "batchId");
        var file = new ByteArrayContent(File.ReadAllBytes(mp4));
        file.Headers.ContentType = new MediaTypeHeaderValue("video/mp4");
        content.Add(file, "file", "pass.mp4");
        var r = await s.Client.PostAsync("/v1/batches", content);
        Assert.True(r.StatusCode == HttpStatusCode.Created, await r.Content.ReadAsStringAsync());
        await WaitForStateAsync(s.Client, "up-1", "done");
        var all = await ManifestAsync(s.Client, "up-1");
        var line = all[0];
        Assert.Equal("pass.mp4", line.GetProperty("frameId").GetString());
        Assert.Equal(drive.FrameCount + 1, all.Count); // the recording's line and one per frame
        Assert.True(line.GetProperty("artifacts").TryGetProperty("tracks", out _));

        // Not a video and not an archive: refused with the archive code, as before.
        using var bad = new MultipartFormDataContent();
        bad.Add(new StringContent(Model), "model");
        bad.Add(new ByteArrayContent("plain text"u8.ToArray()), "file", "notes.txt");
        var refused = await s.Client.PostAsync("/v1/batches", bad);
        Assert.Equal(HttpStatusCode.BadRequest, refused.StatusCode);
        Assert.Contains("archive-invalid", await refused.Content.ReadAsStringAsync());
    }
}
