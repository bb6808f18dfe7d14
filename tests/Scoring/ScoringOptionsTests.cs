using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;

namespace Strayspot.Tests.Scoring;

public class ScoringOptionsTests
{
    [Fact]
    public void Boundary_widths_shrink_to_one_and_stay_there()
    {
        var b = new BoundarySuppressionOptions { InitialWidth = 4, WidthStep = 2, Iterations = 4 };
        Assert.Equal(new[] { 4, 2, 1, 1 }, Enumerable.Range(0, 4).Select(b.WidthAt));
    }

    [Fact]
    public void Even_kernel_is_refused_with_its_value()
    {
        var o = new ScoringOptions { Smoothing = new SmoothingOptions { KernelSize = 6 } };
        var e = Assert.Throws<ScoringInputException>(o.Validate);
        Assert.Equal(ScoringErrorCodes.Options, e.Code);
        Assert.Contains("6", e.Message);
    }
}
