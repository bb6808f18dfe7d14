using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;

namespace Strayspot.Tests.Scoring.Evaluation;

public class SegmentationQualityTests
{
    // 3 classes, ignore 255. Worked by hand:
    //   gt   0 0 0 1 1 2 255
    //   pred 0 0 1 1 1 2 0
    // closed: class 0 TP 2, FN 1 → 2/3; class 1 TP 2, FP 1 → 2/3; class 2 TP 1 → 1; mean 7/9.
    private static readonly byte[] Gt = [0, 0, 0, 1, 1, 2, 255];
    private static readonly byte[] Pred = [0, 0, 1, 1, 1, 2, 0];

    [Fact]
    public void Flagging_right_predictions_costs_their_class()
    {
        // Flag pixel 1 (gt 0, right) and pixel 5 (gt 2, right): class 0 TP 1, FN 2 → 1/3; class 2 TP 0, FN 1 → 0;
        // class 1 unchanged 2/3; open mean (1/3 + 2/3 + 0)/3 = 1/3.
        var q = new SegmentationQuality(3);
        q.Add(Gt, Pred, [0, 1, 0, 0, 0, 1, 0]);
        var r = q.Compute();
        Assert.Equal(7.0 / 9, r.ClosedSetMeanIoU, 12);
        Assert.Equal(1.0 / 3, r.OpenSetMeanIoU, 12);
        Assert.Equal([2.0 / 3, 2.0 / 3, 1.0], r.Classes.Select(c => c.ClosedSet).ToArray(), new Tol());
        Assert.Equal([1.0 / 3, 2.0 / 3, 0.0], r.Classes.Select(c => c.OpenSet).ToArray(), new Tol());
        Assert.Equal((2L, 2L), (r.FlaggedPixels, r.FlaggedCorrect));
    }

    [Fact]
    public void Flagging_a_wrong_prediction_removes_its_false_positive()
    {
        // Flag pixel 2 (gt 0, predicted 1): class 1 loses its FP → 2/2 = 1; class 0 still misses it → 2/3;
        // open mean (2/3 + 1 + 1)/3 = 8/9 (better than closed 7/9).
        var q = new SegmentationQuality(3);
        q.Add(Gt, Pred, [0, 0, 1, 0, 0, 0, 0]);
        var r = q.Compute();
        Assert.Equal(8.0 / 9, r.OpenSetMeanIoU, 12);
        Assert.Equal((1L, 0L), (r.FlaggedPixels, r.FlaggedCorrect));
    }

    [Fact]
    public void Flagged_ignore_pixels_and_classes_absent_from_ground_truth_do_not_count()
    {
        // 4 classes; class 3 is only predicted (pixel 2), so means run over classes 0 and 1.
        // Class 0: TP 1, FN 1 (pixel 2 predicted 3) → 1/2; class 1: TP 1 → 1; closed mean 3/4.
        // The flagged ignore pixel changes nothing and is not counted as flagged.
        var q = new SegmentationQuality(4, ignoreLabel: 1000);
        q.Add(new ushort[] { 0, 1, 0, 1000 }, new ushort[] { 0, 1, 3, 2 }, [0, 0, 0, 1]);
        var r = q.Compute();
        Assert.Equal([0, 1], r.Classes.Select(c => c.ClassId));
        Assert.Equal(0.75, r.ClosedSetMeanIoU, 12);
        Assert.Equal(0.75, r.OpenSetMeanIoU, 12);
        Assert.Equal(0, r.FlaggedPixels);
    }

    [Fact]
    public void Frames_accumulate_and_merge_equals_one_accumulator()
    {
        var one = new SegmentationQuality(3);
        one.Add(Gt, Pred, [0, 1, 0, 0, 0, 1, 0]);
        one.Add(Pred, Gt.Select(g => g == 255 ? (byte)0 : g).ToArray(), [0, 0, 0, 0, 0, 0, 0]);
        var a = new SegmentationQuality(3);
        var b = new SegmentationQuality(3);
        a.Add(Gt, Pred, [0, 1, 0, 0, 0, 1, 0]);
        b.Add(Pred, Gt.Select(g => g == 255 ? (byte)0 : g).ToArray(), [0, 0, 0, 0, 0, 0, 0]);
        a.Merge(b);
        Assert.Equal(one.Compute().Classes, a.Compute().Classes);
        Assert.NotEqual(b.Compute().Classes, a.Compute().Classes);
    }

    [Fact]
    public void Bad_maps_are_refused_with_their_values()
    {
        var q = new SegmentationQuality(3);
        Assert.Contains("got 5 at position 1", Assert.Throws<ScoringInputException>(() => q.Add([0, 5], [0, 0], [0, 0])).Message);
        Assert.Contains("Predicted class ids must be below 3; got 3", Assert.Throws<ScoringInputException>(() => q.Add([0, 0], [0, 3], [0, 0])).Message);
        Assert.Contains("got 2 at position 0", Assert.Throws<ScoringInputException>(() => q.Add([0, 0], [0, 0], [2, 0])).Message);
        Assert.Equal(EvaluationErrorCodes.LengthMismatch, Assert.Throws<ScoringInputException>(() => q.Add([0], [0, 0], [0, 0])).Code);
        Assert.Equal(EvaluationErrorCodes.Argument, Assert.Throws<ScoringInputException>(() => new SegmentationQuality(3, ignoreLabel: 2)).Code);
        q.Add([255, 255], [0, 1], [0, 0]);
        Assert.Equal(EvaluationErrorCodes.OneClass, Assert.Throws<ScoringInputException>(() => q.Compute()).Code);
    }

    private sealed class Tol : IEqualityComparer<double>
    {
        public bool Equals(double x, double y) => Math.Abs(x - y) < 1e-12;
        public int GetHashCode(double obj) => 0;
    }
}
