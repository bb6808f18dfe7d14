using Microsoft.AspNetCore.Http;
using Microsoft.Extensions.Primitives;
using Strayspot.Scoring.Pipeline;
using Strayspot.Service.Api;

namespace Strayspot.Tests.Service.Api;

public class ScoringFormTests
{
    private static FormCollection Form(params (string Key, string Value)[] fields) =>
        new(fields.GroupBy(f => f.Key).ToDictionary(g => g.Key, g => new StringValues(g.Select(f => f.Value).ToArray())));

    [Fact]
    public void Overrides_replace_only_what_they_name()
    {
        var profile = new ScoringOptions { Method = ScoreMethod.Sml, Threshold = 2f, MinimumRegionArea = 64 };
        var (r, errors) = ScoringForm.Parse(Form(("method", "Energy"), ("threshold", "-1.5"), ("smoothing", "off"),
            ("frameWidth", "640"), ("frameHeight", "480"), ("rigId", "rig-7"), ("captureTime", "2026-12-01T08:30:00Z"),
            ("artifacts", "mask, heat")), profile, 1_000_000);
        Assert.Empty(errors);
        Assert.Equal(ScoreMethod.Energy, r!.Options.Method);
        Assert.Equal(-1.5f, r.Options.Threshold);
        Assert.False(r.Options.Smoothing.Enabled);
        Assert.True(r.Options.BoundarySuppression.Enabled);
        Assert.Equal(64, r.Options.MinimumRegionArea);
        Assert.Equal((640, 480), (r.FrameWidth!.Value, r.FrameHeight!.Value));
        Assert.Equal("rig-7", r.Metadata.RigId);
        Assert.Equal(new DateTimeOffset(2026, 12, 1, 8, 30, 0, TimeSpan.Zero), r.Metadata.CaptureTime);
        Assert.Equal(["mask", "heat"], r.Artifacts);
    }

    [Fact]
    public void All_means_every_artifact_the_endpoint_can_make_as_score_and_batches_take_it()
    {
        var noOverlay = Strayspot.Service.Hosting.ArtifactStore.Files.Keys.Where(k => k != "overlay").ToHashSet();
        var (r, errors) = ScoringForm.Parse(Form(("artifacts", "all")), new ScoringOptions(), 100, noOverlay);
        Assert.Empty(errors);
        Assert.Equal(Strayspot.Service.Rendering.ArtifactWriter.All.Where(a => a != "overlay"), r!.Artifacts);
    }

    [Fact]
    public void No_fields_keep_the_profile_and_default_artifacts()
    {
        var profile = new ScoringOptions { Threshold = 1.25f };
        var (r, errors) = ScoringForm.Parse(Form(), profile, 100);
        Assert.Empty(errors);
        Assert.Equal(profile, r!.Options);
        Assert.Null(r.FrameWidth);
        Assert.Equal(ScoringForm.DefaultArtifacts, r.Artifacts);
    }

    [Theory]
    [InlineData("method", "softmax", "softmax")]
    [InlineData("threshold", "NaN", "NaN")]
    [InlineData("threshold", "high", "high")]
    [InlineData("minArea", "0", "minArea '0'")]
    [InlineData("minArea", "2.5", "2.5")]
    [InlineData("smoothing", "maybe", "on or off")]
    [InlineData("frameWidth", "-3", "'-3'")]
    [InlineData("captureTime", "yesterday", "yesterday")]
    [InlineData("artifacts", "mask,x-ray", "x-ray")]
    [InlineData("treshold", "2", "'treshold' is not a field")]
    public void Each_bad_value_is_named_with_its_field(string field, string value, string expected)
    {
        var (r, errors) = ScoringForm.Parse(Form((field, value)), new ScoringOptions(), 1_000_000);
        Assert.Null(r);
        Assert.Contains(expected, Assert.Contains(field == "frameWidth" ? "frameWidth" : field, errors)[0]);
    }

    [Fact]
    public void Frame_size_needs_both_sides_and_respects_the_pixel_limit()
    {
        var (_, one) = ScoringForm.Parse(Form(("frameWidth", "100")), new ScoringOptions(), 1_000_000);
        Assert.Contains("together", one["frameHeight"][0]);
        var (_, big) = ScoringForm.Parse(Form(("frameWidth", "2000"), ("frameHeight", "1000")), new ScoringOptions(), 1_000_000);
        Assert.Contains("2000000", big["frameWidth"][0]);
        Assert.Contains("1000000", big["frameWidth"][0]);
    }

    [Fact]
    public void A_field_given_twice_is_refused()
    {
        var (_, errors) = ScoringForm.Parse(Form(("method", "sml"), ("method", "msp")), new ScoringOptions(), 100);
        Assert.Contains("2 times", errors["method"][0]);
    }
}
