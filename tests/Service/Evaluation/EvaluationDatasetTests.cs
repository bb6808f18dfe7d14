using Strayspot.Scoring.Logits;
using Strayspot.Service.Demo;
using Strayspot.Service.Evaluation;

namespace Strayspot.Tests.Service.Evaluation;

public sealed class EvaluationDatasetTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("strayspot-dataset-").FullName;

    public void Dispose() => Directory.Delete(_dir, recursive: true);

    private static void Frame(string path, int w = 8, int h = 6) => DemoPng.SaveRgb(path, new byte[w * h * 3], w, h);

    private static void Mask(string path, int w = 8, int h = 6, byte value = 0)
    {
        var v = new byte[w * h];
        v[0] = 1;
        v[w * h - 1] = value;
        Directory.CreateDirectory(Path.GetDirectoryName(path)!);
        DemoPng.SaveGray(path, v, w, h);
    }

    [Fact]
    public void Flat_layout_matches_frames_masks_and_labels_by_id_in_name_order()
    {
        foreach (string id in new[] { "b", "a" })
        {
            Frame(Path.Combine(_dir, $"frame_{id}.png"));
            Mask(Path.Combine(_dir, $"mask_{id}.png"));
            Mask(Path.Combine(_dir, $"labels_{id}.png"));
        }
        File.WriteAllText(Path.Combine(_dir, "notes.txt"), "not part of the set");
        var set = EvaluationDataset.Open(_dir, classCount: 4);
        Assert.Equal("flat", set.Layout);
        Assert.Equal(["a", "b"], set.Items.Select(i => i.Id));
        Assert.True(set.HasLabels);
        Assert.EndsWith("mask_a.png", set.Items[0].MaskPath);
    }

    [Fact]
    public void Split_layout_is_used_when_a_frames_folder_exists_and_accepts_jpeg_frames()
    {
        Directory.CreateDirectory(Path.Combine(_dir, "frames"));
        using (var img = new SixLabors.ImageSharp.Image<SixLabors.ImageSharp.PixelFormats.Rgb24>(8, 6))
            SixLabors.ImageSharp.ImageExtensions.SaveAsJpeg(img, Path.Combine(_dir, "frames", "cam1-0001.jpg"));
        Mask(Path.Combine(_dir, "masks", "cam1-0001.png"));
        var set = EvaluationDataset.Open(_dir);
        Assert.Equal("split", set.Layout);
        var item = Assert.Single(set.Items);
        Assert.Equal("cam1-0001", item.Id);
        Assert.False(set.HasLabels);
    }

    [Fact]
    public void Every_problem_of_every_file_is_listed_in_one_error()
    {
        Directory.CreateDirectory(Path.Combine(_dir, "frames"));
        Frame(Path.Combine(_dir, "frames", "ok.png"));
        Mask(Path.Combine(_dir, "masks", "ok.png"));
        Frame(Path.Combine(_dir, "frames", "lonely.png"));                 // no mask
        Mask(Path.Combine(_dir, "masks", "orphan.png"));                   // no frame
        Frame(Path.Combine(_dir, "frames", "small.png"));
        Mask(Path.Combine(_dir, "masks", "small.png"), w: 4, h: 3);        // size mismatch
        Frame(Path.Combine(_dir, "frames", "seven.png"));
        Mask(Path.Combine(_dir, "masks", "seven.png"), value: 7);          // bad mask value
        Frame(Path.Combine(_dir, "frames", "colour.png"));
        DemoPng.SaveRgb(Path.Combine(_dir, "masks", "colour.png"), new byte[8 * 6 * 3], 8, 6); // not grayscale
        Frame(Path.Combine(_dir, "frames", "twice.png"));
        File.Copy(Path.Combine(_dir, "frames", "twice.png"), Path.Combine(_dir, "frames", "twice.webp"));
        Mask(Path.Combine(_dir, "masks", "twice.png"));
        File.WriteAllText(Path.Combine(_dir, "frames", "broken.png"), "not an image");
        Mask(Path.Combine(_dir, "masks", "broken.png"));

        var e = Assert.Throws<ScoringInputException>(() => EvaluationDataset.Open(_dir));
        Assert.Equal(DatasetErrorCodes.Invalid, e.Code);
        Assert.Contains("7 problem(s)", e.Message);
        Assert.Contains("frames/lonely.png: no mask (expected masks/lonely.png)", e.Message);
        Assert.Contains("masks/orphan.png: no frame with id 'orphan'", e.Message);
        Assert.Contains("masks/small.png: 4×3, but its frame is 8×6", e.Message);
        Assert.Contains("masks/seven.png: value 7 at x=7, y=5", e.Message);
        Assert.Contains("masks/colour.png: a Rgb", e.Message);
        Assert.Contains("same id 'twice'", e.Message);
        Assert.Contains("frames/broken.png: not a PNG, JPEG or WebP image", e.Message);
        Assert.DoesNotContain("ok.png", e.Message);
    }

    [Fact]
    public void Label_values_outside_the_models_classes_and_partial_labels_are_listed()
    {
        for (int i = 0; i < 3; i++)
        {
            Frame(Path.Combine(_dir, $"frame_{i}.png"));
            Mask(Path.Combine(_dir, $"mask_{i}.png"));
        }
        Mask(Path.Combine(_dir, "labels_0.png"), value: 9);
        Mask(Path.Combine(_dir, "labels_1.png"));
        var e = Assert.Throws<ScoringInputException>(() => EvaluationDataset.Open(_dir, classCount: 6));
        Assert.Contains("labels_0.png: class 9 at x=7, y=5 (the model has classes 0..5", e.Message);
        Assert.Contains("frame_2.png: no class label map, but 2 other frame(s) have one", e.Message);
    }

    [Fact]
    public void Missing_and_empty_folders_have_their_own_codes()
    {
        Assert.Equal(DatasetErrorCodes.Missing,
            Assert.Throws<ScoringInputException>(() => EvaluationDataset.Open(Path.Combine(_dir, "nope"))).Code);
        var e = Assert.Throws<ScoringInputException>(() => EvaluationDataset.Open(_dir));
        Assert.Equal(DatasetErrorCodes.Empty, e.Code);
        Assert.Contains("frame_<id>", e.Message);
    }
}
