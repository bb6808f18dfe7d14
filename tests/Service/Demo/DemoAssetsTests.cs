using System.Text.Json;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Calibration;
using Strayspot.Service.Demo;
using Strayspot.Service.Inference;
using Strayspot.Service.Models;

namespace Strayspot.Tests.Service.Demo;

[Collection(DemoCollection.Name)]
public sealed class DemoAssetsTests(DemoFixture fixture)
{
    private static string Committed => DemoFixture.CommittedFolder;

    [Fact]
    public void RebuildingGivesTheCommittedFiles()
    {
        Assert.NotEmpty(fixture.Result.Files);
        foreach (var built in fixture.Result.Files)
        {
            string relative = Path.GetRelativePath(fixture.Folder, built);
            string committed = Path.Combine(Committed, relative);
            Assert.True(File.Exists(committed), $"{relative} is built but not committed");
            if (relative.EndsWith(".png", StringComparison.Ordinal))
            {
                // Compare decoded pixels: the PNG encoder's bytes are not part of the contract.
                if (Path.GetFileName(relative).StartsWith("mask_", StringComparison.Ordinal))
                    Assert.Equal(DemoPng.LoadGray(committed).Values, DemoPng.LoadGray(built).Values);
                else
                    Assert.Equal(DemoPng.LoadRgb(committed).Rgb, DemoPng.LoadRgb(built).Rgb);
            }
            else if (relative == DemoAssets.CalibrationFile)
            {
                // Creation time and tool version vary; the statistics may differ in the last bits between CPUs.
                var a = CalibrationArtifact.Load(committed);
                var b = CalibrationArtifact.Load(built);
                Assert.Equal(a.ModelSha256, b.ModelSha256);
                Assert.Equal(a.DescriptorSha256, b.DescriptorSha256);
                Assert.Equal(a.FrameCount, b.FrameCount);
                Assert.Equal(a.FallbackClasses, b.FallbackClasses);
                Assert.Equal(JsonSerializer.Serialize(a.MeasuredWith), JsonSerializer.Serialize(b.MeasuredWith));
                Assert.NotNull(a.MeasuredWith);
                Assert.Equal(a.Classes.Select(c => (c.Name, c.Count)), b.Classes.Select(c => (c.Name, c.Count)));
                for (int i = 0; i < a.Classes.Count; i++)
                {
                    Assert.Equal(a.Classes[i].Mean, b.Classes[i].Mean, 1e-6);
                    Assert.Equal(a.Classes[i].Std, b.Classes[i].Std, 1e-6);
                }
            }
            else
            {
                Assert.True(File.ReadAllBytes(committed).AsSpan().SequenceEqual(File.ReadAllBytes(built)), $"{relative} differs from the committed file");
            }
        }
    }

    [Fact]
    public void CommittedDemoStaysWithinTwoMegabytes()
    {
        long total = Directory.EnumerateFiles(Committed, "*", SearchOption.AllDirectories).Sum(f => new FileInfo(f).Length);
        Assert.True(total <= 2 * 1024 * 1024, $"models/demo holds {total} bytes");
    }

    [Fact]
    public void DescriptorNamesOurClassesAndDynamicInput()
    {
        var descriptor = JsonSerializer.Deserialize<ModelDescriptor>(File.ReadAllText(Path.Combine(Committed, DemoAssets.DescriptorFile)))!;
        Assert.Equal(ApronClasses.Names, descriptor.Classes.Select(c => c.Name));
        Assert.Equal(["pavement", "marking"], descriptor.Classes.Where(c => c.Surface).Select(c => c.Name));
        Assert.All(descriptor.Classes, c => Assert.Matches("^#[0-9a-f]{6}$", c.Color!));
        Assert.Equal(ApronClasses.Count, descriptor.Classes.Select(c => c.Color).Distinct().Count());
        Assert.Equal("dynamic", descriptor.Input.Size.Mode);
        Assert.Equal(4, descriptor.Input.Size.PadMultiple);
        Assert.Null(descriptor.Input.Size.ResizeSide);
        Assert.Equal(255f, descriptor.Input.ValueScale);
        Assert.Equal("input", descriptor.Input.Tensor);
        Assert.Equal("logits", descriptor.Output.Tensor);
    }

    [Fact]
    public void CommittedFolderLoadsWithItsCalibrationBoundToTheModel()
    {
        using var bundle = ModelBundle.Load(Committed, new ModelRuntimeOptions { IntraOpThreads = 1, WarmUp = false });
        Assert.Equal(DemoAssets.CalibrationFile, bundle.StatisticsSource);
        Assert.Null(bundle.Warning);
        var stats = bundle.Statistics!;
        Assert.Equal(ApronClasses.Names, stats.Classes.Select(c => c.Name));
        Assert.All(stats.Classes, c => Assert.True(c.Count >= stats.MinimumCount && c.Std > 0, $"{c.Name}: {c.Count} / {c.Std}"));
        var artifact = CalibrationArtifact.Load(Path.Combine(Committed, DemoAssets.CalibrationFile));
        Assert.Equal(new DemoBuildOptions().TrainingFrames, artifact.FrameCount);
        Assert.Empty(artifact.FallbackClasses);
        Assert.False(File.Exists(Path.Combine(Committed, "statistics.json")), "calibration.json replaces statistics.json");
    }

    [Fact]
    public void HeldOutMasksMatchTheRegeneratedSet()
    {
        var regenerated = DemoAssets.HeldOut(3);
        for (int i = 0; i < regenerated.Count; i++)
        {
            var (mask, w, h) = DemoPng.LoadGray(Path.Combine(Committed, DemoAssets.HeldOutFolder, $"mask_{i:D3}.png"));
            Assert.Equal((ApronSceneGenerator.DefaultWidth, ApronSceneGenerator.DefaultHeight), (w, h));
            Assert.Equal(regenerated[i].AnomalyMask, mask);
            Assert.All(mask.Distinct(), v => Assert.Contains(v, new byte[] { 0, 1, 255 }));
            Assert.Contains((byte)1, mask);
            var (rgb, _, _) = DemoPng.LoadRgb(Path.Combine(Committed, DemoAssets.HeldOutFolder, $"frame_{i:D3}.png"));
            Assert.Equal(regenerated[i].Frame.Rgb, rgb);
        }
    }
}
