using Strayspot.Scoring.Logits;

namespace Strayspot.Tests.Scoring.Logits;

public class LogitsValidationTests
{
    [Fact]
    public void Finite_logits_pass_including_extremes()
    {
        var data = new float[3 * 17 * 13];
        data[0] = float.MaxValue; data[1] = float.MinValue; data[2] = float.Epsilon; data[^1] = -0f;
        LogitsValidation.EnsureFinite(new LogitsView(data, 3, 17, 13));
    }

    [Theory]
    [InlineData(float.NaN)]
    [InlineData(float.PositiveInfinity)]
    [InlineData(float.NegativeInfinity)]
    public void Non_finite_value_is_refused_with_count_and_first_position(float bad)
    {
        // Small (sequential scan) and large (parallel chunked scan) inputs; bad values in the vector body and the tail.
        foreach (var (c, h, w) in new[] { (3, 5, 7), (4, 300, 901) })
        {
            var data = new float[c * h * w];
            int first = 2 * h * w + 3 * w + 4;
            data[first] = bad;
            data[^1] = bad;
            data[^2] = float.NaN;
            var e = Assert.Throws<ScoringInputException>(() => LogitsValidation.EnsureFinite(new LogitsView(data, c, h, w)));
            Assert.Equal(ScoringErrorCodes.LogitsNonFinite, e.Code);
            Assert.Contains("3 non-finite", e.Message);
            Assert.Contains("channel 2, y 3, x 4", e.Message);
        }
    }

    [Fact]
    public void Each_position_is_found_by_the_vector_scan()
    {
        var data = new float[37];
        for (int i = 0; i < data.Length; i++)
        {
            data[i] = float.NaN;
            Assert.False(LogitsValidation.AllFinite(data));
            data[i] = 1e30f;
            Assert.True(LogitsValidation.AllFinite(data));
        }
    }
}
