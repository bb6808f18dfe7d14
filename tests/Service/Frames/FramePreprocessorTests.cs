using OpenCvSharp;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Frames;

public class FramePreprocessorTests
{
    private static InputDescriptor Raw(SizePolicy size, string layout = "nhwc", string order = "rgb") => new()
    {
        Layout = layout, ChannelOrder = order, ValueScale = 1f, Mean = [0, 0, 0], Std = [1, 1, 1], Size = size,
    };

    [Theory]
    [InlineData(37, 23, 29, 16)] // shrink
    [InlineData(13, 9, 31, 20)]  // enlarge
    [InlineData(40, 30, 40, 30)] // same size
    public void BilinearResizeMatchesOpenCvLinear(int srcW, int srcH, int dstW, int dstH)
    {
        // Outside reference: OpenCV's cv::resize with INTER_LINEAR (half-pixel centres), through OpenCvSharp4.
        using var image = TestImages.Noise(srcW, srcH, seed: srcW);
        using var frame = DecodedFrame.FromImage(image.Clone());
        var prep = new FramePreprocessor(Raw(new SizePolicy { Mode = "fixed", Height = dstH, Width = dstW }));
        var input = prep.Prepare(frame);
        Assert.Equal(new long[] { 1, dstH, dstW, 3 }, input.Shape);

        using var src = new Mat(srcH, srcW, MatType.CV_8UC3);
        for (int y = 0; y < srcH; y++)
            for (int x = 0; x < srcW; x++)
            {
                var p = image[x, y];
                src.Set(y, x, new Vec3b(p.R, p.G, p.B));
            }
        using var dst = new Mat();
        Cv2.Resize(src, dst, new OpenCvSharp.Size(dstW, dstH), 0, 0, InterpolationFlags.Linear);
        var ours = input.Data.Span;
        double worst = 0;
        for (int y = 0; y < dstH; y++)
            for (int x = 0; x < dstW; x++)
            {
                var q = dst.Get<Vec3b>(y, x);
                for (int c = 0; c < 3; c++)
                    worst = Math.Max(worst, Math.Abs(ours[(y * dstW + x) * 3 + c] - q[c]));
            }
        // OpenCV rounds to 8 bits with fixed-point weights; we keep floats.
        Assert.True(worst <= 1.0, $"largest difference {worst}");
    }

    [Fact]
    public void NormalizesPerChannelInModelOrderForBgrNchw()
    {
        using var image = TestImages.Gradient(6, 4, seed: 5);
        using var frame = DecodedFrame.FromImage(image.Clone());
        var descriptor = new InputDescriptor
        {
            Layout = "nchw", ChannelOrder = "bgr", ValueScale = 255f, Mean = [0.4f, 0.5f, 0.6f], Std = [0.2f, 0.25f, 0.3f],
            Size = new SizePolicy { Mode = "dynamic" },
        };
        var input = new FramePreprocessor(descriptor).Prepare(frame);
        Assert.Equal(new long[] { 1, 3, 4, 6 }, input.Shape);
        var data = input.Data.Span;
        for (int y = 0; y < 4; y++)
            for (int x = 0; x < 6; x++)
            {
                var p = image[x, y];
                float[] bgr = [p.B, p.G, p.R];
                for (int c = 0; c < 3; c++)
                    Assert.Equal((bgr[c] / 255f - descriptor.Mean[c]) / descriptor.Std[c], data[c * 24 + y * 6 + x], 4);
            }
    }

    [Theory]
    [InlineData("rgb")]
    [InlineData("bgr")]
    public void A_frame_of_the_input_size_gets_the_same_values_as_the_resampling_path(string order)
    {
        // The equal-size shortcut must not change a single bit: padding to a multiple of 8 sends the same frame
        // through the resampling path (zero weights, content at the top left), which is compared bit for bit.
        using var image = TestImages.Noise(21, 13, seed: 3);
        using var frame = DecodedFrame.FromImage(image.Clone());
        InputDescriptor Of(int pad) => new()
        {
            Layout = "nchw", ChannelOrder = order, ValueScale = 255f, Mean = [0.485f, 0.456f, 0.406f], Std = [0.229f, 0.224f, 0.225f],
            Size = new SizePolicy { Mode = "dynamic", PadMultiple = pad },
        };
        var direct = new FramePreprocessor(Of(1)).Prepare(frame);
        var padded = new FramePreprocessor(Of(8)).Prepare(frame);
        Assert.Equal(new long[] { 1, 3, 13, 21 }, direct.Shape);
        Assert.Equal(new long[] { 1, 3, 16, 24 }, padded.Shape);
        for (int c = 0; c < 3; c++)
            for (int y = 0; y < 13; y++)
                for (int x = 0; x < 21; x++)
                    Assert.Equal(BitConverter.SingleToInt32Bits(padded.Data.Span[(c * 16 + y) * 24 + x]),
                        BitConverter.SingleToInt32Bits(direct.Data.Span[(c * 13 + y) * 21 + x]));
    }

    [Fact]
    public void PlanFollowsLongestAndShortestSideAndPadsToMultiple()
    {
        var longest = FramePreprocessor.Plan(new SizePolicy { Mode = "dynamic", ResizeSide = "longest", SideLength = 1024, PadMultiple = 32 }, 1080, 1920);
        Assert.Equal(new ContentBox(1080, 1920, 576, 1024, 576, 1024), longest);
        var shortest = FramePreprocessor.Plan(new SizePolicy { Mode = "dynamic", ResizeSide = "shortest", SideLength = 500, PadMultiple = 32 }, 1080, 1920);
        Assert.Equal(new ContentBox(1080, 1920, 500, 889, 512, 896), shortest);
        var keep = FramePreprocessor.Plan(new SizePolicy { Mode = "dynamic", PadMultiple = 8 }, 1, 1);
        Assert.Equal(new ContentBox(1, 1, 1, 1, 8, 8), keep);
    }

    [Fact]
    public void PaddingIsZeroAfterNormalizationAndBoxRecordsContent()
    {
        using var frame = DecodedFrame.FromImage(TestImages.Noise(10, 7, seed: 9));
        var descriptor = new InputDescriptor { Layout = "nchw", Mean = [0.5f, 0.5f, 0.5f], Std = [0.5f, 0.5f, 0.5f], Size = new SizePolicy { Mode = "dynamic", PadMultiple = 4 } };
        var input = new FramePreprocessor(descriptor).Prepare(frame);
        Assert.Equal(new ContentBox(7, 10, 7, 10, 8, 12), input.Box);
        var data = input.Data.Span;
        for (int c = 0; c < 3; c++)
            for (int y = 0; y < 8; y++)
                for (int x = 0; x < 12; x++)
                    if (y >= 7 || x >= 10) Assert.Equal(0f, data[c * 96 + y * 12 + x]);
                    else Assert.InRange(data[c * 96 + y * 12 + x], -1f, 1f);
    }

    [Fact]
    public void ContentInOutputScalesTheBoxByOutputOverInputSize()
    {
        var box = new ContentBox(700, 1000, 700, 1000, 704, 1024);
        var (h, w) = box.ContentInOutput(176, 256);
        Assert.Equal(175.0, h, 12);
        Assert.Equal(250.0, w, 12);
        Assert.Equal((175, 250), box.CropInOutput(176, 256));
        // 701 rows at stride 4 cover 175.25 output rows: rounded to the nearest whole row.
        Assert.Equal((175, 250), (box with { ContentHeight = 701 }).CropInOutput(176, 256));
    }
}
