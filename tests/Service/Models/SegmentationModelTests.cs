using System.Security.Cryptography;
using Google.Protobuf;
using Onnx;
using Strayspot.Service.Frames;
using Strayspot.Service.Models;
using Strayspot.Tests.Support;

namespace Strayspot.Tests.Service.Models;

public class SegmentationModelTests
{
    private static readonly ModelRuntimeOptions TwoThreads = new() { IntraOpThreads = 1 };

    // Outside reference for every comparison here: ONNX Runtime's own Conv, AveragePool and Transpose operators
    // against the same arithmetic written out in C# (TestSegmentationGraph.Reference).
    [Theory]
    [InlineData(false, 1, null, null)]
    [InlineData(false, 4, null, null)]
    [InlineData(true, 1, null, null)]
    [InlineData(true, 4, null, null)]
    [InlineData(false, 2, 16, 24)]
    [InlineData(true, 2, 16, 24)]
    public void LogitsMatchTheGraphArithmetic(bool channelsLast, int stride, int? fixedH, int? fixedW)
    {
        var graph = new TestSegmentationGraph { Classes = 5, Stride = stride, ChannelsLast = channelsLast, FixedHeight = fixedH, FixedWidth = fixedW };
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path);
        using var model = SegmentationModel.LoadFolder(dir.Path, TwoThreads);
        using var frame = DecodedFrame.FromImage(TestImages.Noise(22, 13, seed: stride));
        var input = new FramePreprocessor(model.Descriptor.Input).Prepare(frame);
        int ih = input.Box.InputHeight, iw = input.Box.InputWidth;
        float[] nchw = ToNchw(input, channelsLast);
        var expected = graph.Reference(nchw, ih, iw);

        using var lease = model.Run(input);
        var view = lease.View;
        Assert.Equal((5, ih / stride, iw / stride), (view.Channels, view.Height, view.Width));
        var actual = view.Data.Span;
        for (int i = 0; i < expected.Length; i++)
            Assert.Equal(expected[i], actual[i], 4);
    }

    [Fact]
    public void ALoneRunSessionIsOneModelWithTwoRuntimeSessionsAndTheSameLogits()
    {
        // Outside reference: ONNX Runtime's Conv and AveragePool against TestSegmentationGraph.Reference, as above.
        var graph = new TestSegmentationGraph { Classes = 4, Stride = 2 };
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path);
        string modelPath = Path.Combine(dir.Path, SegmentationModel.ModelFileName);
        using var frame = DecodedFrame.FromImage(TestImages.Noise(18, 10, seed: 9));
        using (var model = SegmentationModel.LoadFolder(dir.Path, new ModelRuntimeOptions { IntraOpThreads = 1, LoneRunThreads = 2 }))
        {
            Assert.Equal((1, 2), (SegmentationModel.LiveSessions(modelPath), model.OnnxSessions));
            var input = new FramePreprocessor(model.Descriptor.Input).Prepare(frame);
            var expected = graph.Reference(input.Data.ToArray(), input.Box.InputHeight, input.Box.InputWidth);
            // Two runs at once: one takes the lone-run session, the other the shared one; both give the graph's arithmetic.
            Parallel.For(0, 4, new ParallelOptions { MaxDegreeOfParallelism = 2 }, _ =>
            {
                using var lease = model.Run(input);
                var actual = lease.View.Data.Span;
                for (int i = 0; i < expected.Length; i++) Assert.Equal(expected[i], actual[i], 4);
            });
        }
        Assert.Equal(0, SegmentationModel.LiveSessions(modelPath));
        using var plain = SegmentationModel.LoadFolder(dir.Path, new ModelRuntimeOptions { IntraOpThreads = 2, LoneRunThreads = 2 });
        Assert.Equal(1, plain.OnnxSessions);
    }

    [Fact]
    public void CroppingPaddedLogitsEqualsRunningTheUnpaddedContent()
    {
        // Frame 20×8 padded to 32×16 for a stride-4 model: content covers 5×2 output cells exactly.
        var graph = new TestSegmentationGraph { Classes = 3, Stride = 4 };
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path, graph.Descriptor(new SizePolicy { Mode = "dynamic", PadMultiple = 16 }));
        using var model = SegmentationModel.LoadFolder(dir.Path, TwoThreads);
        using var frame = DecodedFrame.FromImage(TestImages.Noise(20, 8, seed: 4));
        var input = new FramePreprocessor(model.Descriptor.Input).Prepare(frame);
        Assert.Equal(new ContentBox(8, 20, 8, 20, 16, 32), input.Box);
        using var lease = model.Run(input);
        float[]? scratch = null;
        var cropped = input.Box.CropToContent(lease.View, ref scratch);
        Assert.Equal((3, 2, 5), (cropped.Channels, cropped.Height, cropped.Width));

        var unpadded = new FramePreprocessor(new InputDescriptor { Tensor = graph.InputName, Size = new SizePolicy { Mode = "dynamic" } }).Prepare(frame);
        var expected = graph.Reference(unpadded.Data.Span, 8, 20);
        var actual = cropped.Data.Span;
        Assert.Equal(expected.Length, actual.Length);
        for (int i = 0; i < expected.Length; i++)
            Assert.Equal(expected[i], actual[i], 4);
    }

    [Fact]
    public void OneByOneFrameRunsEndToEnd()
    {
        var graph = new TestSegmentationGraph { Classes = 3, Stride = 4 };
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path, graph.Descriptor(new SizePolicy { Mode = "dynamic", PadMultiple = 4 }));
        using var model = SegmentationModel.LoadFolder(dir.Path, TwoThreads);
        using var frame = DecodedFrame.FromImage(TestImages.Noise(1, 1, seed: 8));
        var input = new FramePreprocessor(model.Descriptor.Input).Prepare(frame);
        Assert.Equal(new ContentBox(1, 1, 1, 1, 4, 4), input.Box);
        using var lease = model.Run(input);
        float[]? scratch = null;
        var cropped = input.Box.CropToContent(lease.View, ref scratch);
        Assert.Equal((3, 1, 1), (cropped.Channels, cropped.Height, cropped.Width));
        // The one output cell averages the frame pixel with 15 zero-padded pixels.
        var expected = graph.Reference(input.Data.Span, 4, 4);
        for (int c = 0; c < 3; c++) Assert.Equal(expected[c], cropped.Data.Span[c], 4);
    }

    [Fact]
    public void RunIsSafeFromManyThreads()
    {
        var graph = new TestSegmentationGraph { Classes = 4, Stride = 2 };
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path);
        using var model = SegmentationModel.LoadFolder(dir.Path, TwoThreads);
        var failures = 0;
        Parallel.For(0, 16, new ParallelOptions { MaxDegreeOfParallelism = 4 }, i =>
        {
            using var frame = DecodedFrame.FromImage(TestImages.Noise(10 + i, 6 + i % 3, seed: i));
            var input = new FramePreprocessor(model.Descriptor.Input).Prepare(frame);
            var expected = graph.Reference(input.Data.Span, input.Box.InputHeight, input.Box.InputWidth);
            using var lease = model.Run(input);
            var actual = lease.View.Data.Span;
            for (int k = 0; k < expected.Length; k++)
                if (Math.Abs(expected[k] - actual[k]) > 1e-4) { Interlocked.Increment(ref failures); break; }
        });
        Assert.Equal(0, failures);
    }

    [Fact]
    public void RecordsSha256OfTheModelFileAndLoadTime()
    {
        using var dir = new TempFolder();
        new TestSegmentationGraph().WriteFolder(dir.Path);
        using var model = SegmentationModel.LoadFolder(dir.Path, TwoThreads);
        Assert.Equal(Convert.ToHexStringLower(SHA256.HashData(File.ReadAllBytes(dir["model.onnx"]))), model.ModelSha256);
        Assert.True(model.LoadTime > TimeSpan.Zero);
        Assert.Equal(13, model.Facts.Opset);
    }

    [Fact]
    public void DescriptorClassCountMismatchNamesBothNumbers()
    {
        var graph = new TestSegmentationGraph { Classes = 5 };
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path, graph.Descriptor(classCount: 3));
        var e = Assert.Throws<ModelException>(() => SegmentationModel.LoadFolder(dir.Path, TwoThreads));
        Assert.Equal(ModelErrorCodes.ModelOutputMismatch, e.Code);
        Assert.Contains("outputs 5 classes", e.Message);
        Assert.Contains("lists 3", e.Message);
    }

    [Fact]
    public void WrongTensorNameOrLayoutIsADescriptorError()
    {
        var graph = new TestSegmentationGraph();
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path, graph.Descriptor() with { Input = graph.Descriptor().Input with { Tensor = "image" } });
        var e = Assert.Throws<ModelException>(() => SegmentationModel.LoadFolder(dir.Path, TwoThreads));
        Assert.Equal(ModelErrorCodes.DescriptorInvalid, e.Code);
        Assert.Contains("'image'", e.Message);
        Assert.Contains("pixels", e.Message);

        using var dir2 = new TempFolder();
        graph.WriteFolder(dir2.Path, graph.Descriptor() with { Input = graph.Descriptor().Input with { Layout = "nhwc" } });
        var e2 = Assert.Throws<ModelException>(() => SegmentationModel.LoadFolder(dir2.Path, TwoThreads));
        Assert.Equal(ModelErrorCodes.DescriptorInvalid, e2.Code);
        Assert.Contains("input.layout", e2.Message);
    }

    [Fact]
    public void CorruptAndTruncatedOnnxAreRefused()
    {
        var graph = new TestSegmentationGraph();
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path);
        byte[] good = File.ReadAllBytes(dir["model.onnx"]);

        File.WriteAllBytes(dir["model.onnx"], good.AsSpan(0, good.Length / 2).ToArray());
        var truncated = Assert.Throws<ModelException>(() => SegmentationModel.LoadFolder(dir.Path, TwoThreads));
        Assert.Equal(ModelErrorCodes.ModelInvalid, truncated.Code);

        var junk = new byte[500];
        new Random(1).NextBytes(junk);
        File.WriteAllBytes(dir["model.onnx"], junk);
        var corrupt = Assert.Throws<ModelException>(() => SegmentationModel.LoadFolder(dir.Path, TwoThreads));
        Assert.Equal(ModelErrorCodes.ModelInvalid, corrupt.Code);
    }

    [Theory]
    [InlineData("../outside.bin")]
    [InlineData("/etc/passwd")]
    [InlineData("sub/../../outside.bin")]
    public void ExternalDataOutsideTheFolderIsRefused(string location)
    {
        var graph = new TestSegmentationGraph();
        var proto = graph.Build();
        var w = proto.Graph.Initializer.First(t => t.Name == "conv_w");
        w.FloatData.Clear();
        w.DataLocation = TensorProto.Types.DataLocation.External;
        w.ExternalData.Add(new StringStringEntryProto { Key = "location", Value = location });
        w.ExternalData.Add(new StringStringEntryProto { Key = "offset", Value = "0" });
        w.ExternalData.Add(new StringStringEntryProto { Key = "length", Value = "36" });
        using var dir = new TempFolder();
        string folder = Path.Combine(dir.Path, "model");
        graph.WriteFolder(folder);
        File.WriteAllBytes(Path.Combine(folder, "model.onnx"), proto.ToByteArray());
        File.WriteAllBytes(dir["outside.bin"], new byte[36]);
        var e = Assert.Throws<ModelException>(() => SegmentationModel.LoadFolder(folder, TwoThreads));
        Assert.Equal(ModelErrorCodes.ModelExternalData, e.Code);
        Assert.Contains(location, e.Message);
    }

    [Fact]
    public void ExternalDataInsideTheFolderLoads()
    {
        var graph = new TestSegmentationGraph { Classes = 2 };
        var proto = graph.Build();
        var w = proto.Graph.Initializer.First(t => t.Name == "conv_w");
        var bytes = new byte[w.FloatData.Count * 4];
        Buffer.BlockCopy(w.FloatData.ToArray(), 0, bytes, 0, bytes.Length);
        w.FloatData.Clear();
        w.DataLocation = TensorProto.Types.DataLocation.External;
        w.ExternalData.Add(new StringStringEntryProto { Key = "location", Value = "weights.bin" });
        using var dir = new TempFolder();
        graph.WriteFolder(dir.Path);
        File.WriteAllBytes(dir["model.onnx"], proto.ToByteArray());
        File.WriteAllBytes(dir["weights.bin"], bytes);
        using var model = SegmentationModel.LoadFolder(dir.Path, TwoThreads);
        Assert.Equal(2, model.ClassCount);
    }

    private static float[] ToNchw(PreparedInput input, bool channelsLast)
    {
        var data = input.Data.Span;
        if (!channelsLast) return data.ToArray();
        int h = input.Box.InputHeight, w = input.Box.InputWidth;
        var result = new float[3 * h * w];
        for (int i = 0; i < h * w; i++)
            for (int c = 0; c < 3; c++)
                result[c * h * w + i] = data[i * 3 + c];
        return result;
    }
}
