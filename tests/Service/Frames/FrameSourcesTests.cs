using System.IO.Compression;
using SixLabors.ImageSharp;
using Strayspot.Service.Batches;
using Strayspot.Service.Cli;
using Strayspot.Service.Frames;
using Strayspot.Service.Inference;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Frames;

public class FrameSourcesTests
{
    private static void Png(string path, int seed)
    {
        Directory.CreateDirectory(Path.GetDirectoryName(path)!);
        using var img = TestImages.Noise(20, 12, seed);
        img.SaveAsPng(path);
    }

    private static string Folder(TempFolder dir)
    {
        string root = Path.Combine(dir.Path, "frames");
        Png(Path.Combine(root, "b.png"), 1);
        Png(Path.Combine(root, "a.png"), 2);
        Png(Path.Combine(root, "cam2", "a.png"), 3);
        Png(Path.Combine(root, ".trash", "c.png"), 4);
        File.WriteAllText(Path.Combine(root, "notes.txt"), "not a frame");
        return root;
    }

    /// <summary>The frames of <see cref="Folder"/> as frames.zip.</summary>
    private static string Zipped(TempFolder dir)
    {
        string zip = Path.Combine(dir.Path, "frames.zip");
        ZipFile.CreateFromDirectory(Folder(dir), zip);
        return zip;
    }

    [Fact]
    public void A_folder_is_walked_in_ordinal_order_of_relative_paths_without_hidden_entries()
    {
        using var dir = new TempFolder();
        var frames = new FolderFrameSource(Folder(dir)).Frames().ToList();
        Assert.Equal(["a.png", "b.png", "cam2/a.png"], frames.Select(f => f.Id));
        Assert.Equal([0, 1, 2], frames.Select(f => f.Index));
        Assert.All(frames, f => Assert.Null(f.Timestamp));
        Assert.Equal(["a.png", "b.png"], new FolderFrameSource(Folder(dir), recursive: false).Frames().Select(f => f.Id));
    }

    [Fact]
    public void Archive_file_and_upload_sources_give_the_same_frames_with_stable_ids()
    {
        using var dir = new TempFolder();
        string zip = Zipped(dir);
        string folder = Path.Combine(dir.Path, "frames");
        var archived = new ArchiveFrameSource(zip, Path.Combine(dir.Path, "unpacked"), new ArchiveLimits(100, 1 << 20)).Frames().ToList();
        Assert.Equal(["a.png", "b.png", "cam2/a.png"], archived.Select(f => f.Id));

        var decoder = new FrameDecoder();
        var file = Assert.Single(new FileFrameSource(Path.Combine(folder, "cam2", "a.png")).Frames());
        Assert.Equal("a.png", file.Id);
        using var fromFile = file.Decode(decoder);
        var upload = Assert.Single(new UploadFrameSource("up.png", File.ReadAllBytes(Path.Combine(folder, "cam2", "a.png"))).Frames());
        using var fromUpload = upload.Decode(decoder);
        using var fromArchive = archived[2].Decode(decoder);
        Assert.Equal((20, 12), (fromFile.Width, fromFile.Height));
        Assert.Equal(fromFile.Image[3, 4], fromUpload.Image[3, 4]);
        Assert.Equal(fromFile.Image[7, 2], fromArchive.Image[7, 2]);
    }

    [Fact]
    public void Missing_paths_are_listed_at_once()
    {
        var e = Assert.Throws<FrameException>(() => FrameSources.FromPaths(["/nope/a", "/nope/b"]));
        Assert.Equal(FrameErrorCodes.Missing, e.Code);
        Assert.Contains("/nope/a", e.Message);
        Assert.Contains("/nope/b", e.Message);
    }

    private sealed class Counting : IFrameObserver
    {
        public int Frames;
        public long Pixels;

        public void Scored(ModelVersion model, string method, ReadOnlySpan<float> maxLogit, ReadOnlySpan<ushort> classIndex, int? regions, FrameTimings timings)
        {
            Frames++;
            Pixels += maxLogit.Length;
            Assert.True(timings.Inference > TimeSpan.Zero && timings.Preprocess > TimeSpan.Zero);
        }
    }

    [Fact]
    public void Score_walks_subfolders_and_every_frame_goes_through_the_runners_observer()
    {
        using var dir = new TempFolder();
        string folder = Folder(dir);
        string model = new TestSegmentationGraph { Classes = 3, Stride = 2 }.WriteFolder(Path.Combine(dir.Path, "model"));
        var seen = new Counting();
        using var local = LocalModel.Open(model, new ParallelSettings { IntraOpThreads = 1, WarmUp = false }, seen);
        var ranking = ScoreVerb.ScoreAll(local, ScoreVerb.ExpandFrames([folder]),
            local.Version.Defaults with { Method = Strayspot.Scoring.Pipeline.ScoreMethod.MaxLogit }, Path.Combine(dir.Path, "out"));
        Assert.Equal(3, ranking.Count);
        Assert.Equal(3, seen.Frames);
        Assert.Equal(3 * 20 * 12, seen.Pixels);
        Assert.Contains(ranking, r => r.Frame.EndsWith(Path.Combine("cam2", "a.png"), StringComparison.Ordinal));
        // Command-line reports carry the network's stage times as HTTP reports do.
        string report = File.ReadAllText(Path.Combine(dir.Path, "out", ranking[0].Report));
        Assert.Contains("\"preprocess\"", report);
        Assert.Contains("\"inference\"", report);
    }

    [Fact]
    public void Frames_scored_from_an_archive_are_named_by_the_archive_and_entry_not_the_temporary_copy()
    {
        using var dir = new TempFolder();
        string zip = Zipped(dir);
        string model = new TestSegmentationGraph { Classes = 3, Stride = 2 }.WriteFolder(Path.Combine(dir.Path, "model"));
        using var local = LocalModel.Open(model, new ParallelSettings { IntraOpThreads = 1, WarmUp = false });
        var ranking = ScoreVerb.ScoreAll(local, ScoreVerb.ExpandFrames([zip]),
            local.Version.Defaults with { Method = Strayspot.Scoring.Pipeline.ScoreMethod.MaxLogit }, Path.Combine(dir.Path, "out"));
        Assert.Equal([zip + "!a.png", zip + "!b.png", zip + "!cam2/a.png"], ranking.Select(r => r.Frame).Order(StringComparer.Ordinal));
        Assert.DoesNotContain("strayspot-unpacked-", File.ReadAllText(Path.Combine(dir.Path, "out", "ranking.json")));
    }
}
