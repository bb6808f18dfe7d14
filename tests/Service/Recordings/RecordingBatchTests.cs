using System.Net;
using System.Net.Http.Headers;
using System.Text.Json;
using Strayspot.Service.Demo;
using Strayspot.Tests.Support;
using static Strayspot.Tests.Service.Batches.BatchTestKit;

namespace Strayspot.Tests.Service.Recordings;

/// <summary>A folder holding a video and a frame, submitted through the HTTP batch API of a real Kestrel.</summary>
public class RecordingBatchTests
{
    [VideoFact]
    public async Task A_video_in_a_batch_folder_is_scored_whole_and_its_line_carries_its_tracks()
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
        Assert.False(video.TryGetProperty("error", out _));
        string batchFolder = Path.Combine(s.DataRoot, "batches", "rig-1");
        var artifacts = video.GetProperty("artifacts");
        foreach (string key in new[] { "tracks", "frames", "plot" })
            Assert.True(File.Exists(Path.Combine(batchFolder, artifacts.GetProperty(key).GetString()!)), key);
        var tracks = JsonDocument.Parse(File.ReadAllText(Path.Combine(batchFolder, artifacts.GetProperty("tracks").GetString()!))).RootElement;
        Assert.Equal(drive.FrameCount, tracks.GetProperty("framesScored").GetInt32());
        var kept = tracks.GetProperty("tracks").EnumerateArray().Where(t => t.GetProperty("kept").GetBoolean()).Select(t => t.GetProperty("id").GetInt32()).ToList();
        Assert.Equal(kept, video.GetProperty("regions").EnumerateArray().Select(r => r.GetProperty("id").GetInt32()).ToList());
        // Each sampled frame's line in frames.jsonl carries its timestamp: frame i at i / 10 s.
        var times = File.ReadLines(Path.Combine(batchFolder, artifacts.GetProperty("frames").GetString()!))
            .Select(l => JsonDocument.Parse(l).RootElement.GetProperty("timeSeconds").GetDouble()).ToList();
        Assert.Equal(Enumerable.Range(0, drive.FrameCount).Select(i => i / 10.0), times.Select(t => Math.Round(t, 3)));
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
        var line = Assert.Single(await ManifestAsync(s.Client, "up-1"));
        Assert.Equal("pass.mp4", line.GetProperty("frameId").GetString());
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
