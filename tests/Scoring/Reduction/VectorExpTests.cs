using System.Numerics;
using Strayspot.Scoring.Reduction;

namespace Strayspot.Tests.Scoring.Reduction;

public class VectorExpTests
{
    // Outside reference: the platform's double-precision Math.Exp.
    [Fact]
    public void Matches_Math_Exp_to_a_few_ulps_over_the_softmax_range()
    {
        int lanes = Vector<float>.Count;
        var buffer = new float[lanes];
        double worst = 0;
        for (int i = 0; i <= 800_000; i += lanes)
        {
            for (int l = 0; l < lanes; l++) buffer[l] = -(i + l) * 1e-4f; // 0 … −80
            var e = VectorExp.Exp(new Vector<float>(buffer));
            for (int l = 0; l < lanes; l++)
            {
                double exact = Math.Exp(buffer[l]);
                worst = Math.Max(worst, Math.Abs(e[l] - exact) / exact);
            }
        }
        Assert.True(worst < 4e-7, $"worst relative error {worst}");
    }

    [Fact]
    public void Far_below_range_gives_a_tiny_finite_value_not_NaN()
    {
        var e = VectorExp.Exp(new Vector<float>(-1e30f));
        Assert.True(e[0] >= 0 && e[0] < 1e-37f);
        Assert.Equal(1f, VectorExp.Exp(Vector<float>.Zero)[0]);
    }
}
