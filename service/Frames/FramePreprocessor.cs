using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;
using SixLabors.ImageSharp.Advanced;
using SixLabors.ImageSharp.PixelFormats;
using Strayspot.Service.Models;

namespace Strayspot.Service.Frames;

/// <summary>
/// Resizes (bilinear, pixel centres aligned: the usual "half-pixel" convention), pads bottom/right and normalizes a
/// frame into the model's input layout. Owns a float buffer reused from frame to frame: one instance per worker.
/// </summary>
public sealed class FramePreprocessor
{
    private readonly InputDescriptor _input;
    private readonly bool _nhwc;
    private readonly int[] _sourceChannel = new int[3];
    private readonly float[] _scale = new float[3];
    private readonly float[] _offset = new float[3];
    private float[] _buffer = [];
    private int[] _x0 = [], _x1 = [];
    private float[] _wx = [];

    public FramePreprocessor(InputDescriptor input)
    {
        _input = input;
        _nhwc = input.Layout == "nhwc";
        bool bgr = input.ChannelOrder == "bgr";
        for (int c = 0; c < 3; c++)
        {
            // Mean and std are given in the model's channel order; folded into one multiply-add per value.
            _sourceChannel[c] = bgr ? 2 - c : c;
            _scale[c] = 1f / (input.ValueScale * input.Std[c]);
            _offset[c] = -input.Mean[c] / input.Std[c];
        }
    }

    /// <summary>The input tensor size (height, width) and content size for a frame of the given size.</summary>
    public static ContentBox Plan(SizePolicy size, int frameHeight, int frameWidth)
    {
        if (frameHeight < 1 || frameWidth < 1)
            throw new ArgumentOutOfRangeException(nameof(frameHeight), $"Frame size {frameWidth}×{frameHeight} is empty.");
        int ch, cw;
        if (size.Mode == "fixed")
        {
            ch = size.Height!.Value;
            cw = size.Width!.Value;
        }
        else if (size.ResizeSide is null)
        {
            ch = frameHeight;
            cw = frameWidth;
        }
        else
        {
            int side = size.ResizeSide == "longest" ? Math.Max(frameHeight, frameWidth) : Math.Min(frameHeight, frameWidth);
            double s = (double)size.SideLength!.Value / side;
            double rh = Math.Round(frameHeight * s, MidpointRounding.AwayFromZero), rw = Math.Round(frameWidth * s, MidpointRounding.AwayFromZero);
            // A thin strip scaled by its short side grows without bound: refuse it before the casts overflow.
            if (rh * rw > SizePolicy.MaxInputPixels)
                throw TooLargeForNetwork(frameHeight, frameWidth, rh, rw, size);
            ch = Math.Max(1, (int)rh);
            cw = Math.Max(1, (int)rw);
        }
        long m = Math.Max(1, size.PadMultiple);
        long ih = (ch + m - 1) / m * m, iw = (cw + m - 1) / m * m;
        if (ih * iw > SizePolicy.MaxInputPixels)
            throw TooLargeForNetwork(frameHeight, frameWidth, ih, iw, size);
        return new ContentBox(frameHeight, frameWidth, ch, cw, (int)ih, (int)iw);
    }

    private static FrameException TooLargeForNetwork(int frameHeight, int frameWidth, double inputHeight, double inputWidth, SizePolicy size) =>
        new(FrameErrorCodes.TooLarge,
            $"A {frameWidth}×{frameHeight} frame would become a network input of {inputWidth:0}×{inputHeight:0} (width×height) under the model's input.size " +
            $"(mode {size.Mode}{(size.ResizeSide is null ? "" : $", resizeSide {size.ResizeSide} {size.SideLength}")}, padMultiple {size.PadMultiple}): " +
            $"more than {SizePolicy.MaxInputPixels} pixels. Crop or resize the frame to a usual aspect ratio.");

    public PreparedInput Prepare(DecodedFrame frame)
    {
        var box = Plan(_input.Size, frame.Height, frame.Width);
        int total = 3 * box.InputHeight * box.InputWidth;
        if (_buffer.Length < total) _buffer = new float[total];
        var data = _buffer.AsMemory(0, total);
        var image = frame.Image;
        long[] shape = _nhwc ? [1, box.InputHeight, box.InputWidth, 3] : [1, 3, box.InputHeight, box.InputWidth];
        if (box.ContentHeight == frame.Height && box.ContentWidth == frame.Width && box.InputHeight == frame.Height
            && box.InputWidth == frame.Width && !_nhwc)
        {
            // The frame is the input's size: no resampling, no padding; every value is written, so nothing to clear.
            int bands0 = Math.Min(Environment.ProcessorCount * 2, frame.Height);
            Parallel.For(0, bands0, band =>
            {
                int y0 = (int)((long)frame.Height * band / bands0), y1 = (int)((long)frame.Height * (band + 1) / bands0);
                for (int y = y0; y < y1; y++) WritePlanar(image.DangerousGetPixelRowMemory(y).Span, y, box, data.Span);
            });
            return new PreparedInput(data, shape, box);
        }
        // Padding is zero after normalization.
        data.Span.Clear();
        PrepareColumns(frame.Width, box.ContentWidth);
        double sy = (double)frame.Height / box.ContentHeight;
        int bands = Math.Min(Environment.ProcessorCount * 2, box.ContentHeight);
        Parallel.For(0, bands, band =>
        {
            int y0 = (int)((long)box.ContentHeight * band / bands), y1 = (int)((long)box.ContentHeight * (band + 1) / bands);
            var row = new float[box.ContentWidth * 3];
            for (int y = y0; y < y1; y++)
            {
                double fy = (y + 0.5) * sy - 0.5;
                if (fy < 0) fy = 0;
                int r0 = Math.Min((int)fy, frame.Height - 1);
                int r1 = Math.Min(r0 + 1, frame.Height - 1);
                float wy = (float)(fy - r0);
                if (r0 == frame.Height - 1) wy = 0;
                var top = image.DangerousGetPixelRowMemory(r0).Span;
                var bottom = image.DangerousGetPixelRowMemory(r1).Span;
                InterpolateRow(top, bottom, wy, row);
                Write(row, y, box, data.Span);
            }
        });
        return new PreparedInput(data, shape, box);
    }

    /// <summary>One frame row straight into the three planes: the same value × scale + offset as the resampling path with zero weights.</summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void WritePlanar(ReadOnlySpan<Rgb24> pixels, int y, ContentBox box, Span<float> dst)
    {
        int w = box.ContentWidth, plane = box.InputHeight * box.InputWidth;
        var r = dst.Slice(y * box.InputWidth, w);
        var g = dst.Slice(plane + y * box.InputWidth, w);
        var b = dst.Slice(2 * plane + y * box.InputWidth, w);
        // Model channel c reads source channel _sourceChannel[c]: R, G, B in rgb order, reversed in bgr order.
        bool bgr = _sourceChannel[0] == 2;
        float k0 = _scale[0], k1 = _scale[1], k2 = _scale[2], o0 = _offset[0], o1 = _offset[1], o2 = _offset[2];
        pixels = pixels[..w];
        int x = 0;
        if (Vector128.IsHardwareAccelerated && w >= 16)
        {
            // 16 pixels a pass: three 16-byte loads, each channel gathered by byte shuffles, widened to floats and
            // multiplied then added (no fused multiply-add), so every value equals the scalar loop's.
            var bytes = MemoryMarshal.AsBytes(pixels);
            ref byte src = ref MemoryMarshal.GetReference(bytes);
            var first = bgr ? (B0, B1, B2) : (R0, R1, R2);
            var third = bgr ? (R0, R1, R2) : (B0, B1, B2);
            for (; x + 16 <= w; x += 16)
            {
                var a = Vector128.LoadUnsafe(ref src, (nuint)(3 * x));
                var m = Vector128.LoadUnsafe(ref src, (nuint)(3 * x + 16));
                var z = Vector128.LoadUnsafe(ref src, (nuint)(3 * x + 32));
                StoreScaled(Gather(a, m, z, first), k0, o0, r.Slice(x));
                StoreScaled(Gather(a, m, z, (G0, G1, G2)), k1, o1, g.Slice(x));
                StoreScaled(Gather(a, m, z, third), k2, o2, b.Slice(x));
            }
        }
        for (; x < pixels.Length; x++)
        {
            var p = pixels[x];
            float first = bgr ? p.B : p.R, third = bgr ? p.R : p.B;
            r[x] = first * k0 + o0;
            g[x] = (float)p.G * k1 + o1;
            b[x] = third * k2 + o2;
        }
    }

    // Byte shuffles picking one channel of 16 packed RGB pixels out of three 16-byte blocks (index 0x80: zero).
    private static readonly Vector128<byte> R0 = Vector128.Create((byte)0, 3, 6, 9, 12, 15, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80);
    private static readonly Vector128<byte> R1 = Vector128.Create((byte)0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 2, 5, 8, 11, 14, 0x80, 0x80, 0x80, 0x80, 0x80);
    private static readonly Vector128<byte> R2 = Vector128.Create((byte)0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 1, 4, 7, 10, 13);
    private static readonly Vector128<byte> G0 = Vector128.Create((byte)1, 4, 7, 10, 13, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80);
    private static readonly Vector128<byte> G1 = Vector128.Create((byte)0x80, 0x80, 0x80, 0x80, 0x80, 0, 3, 6, 9, 12, 15, 0x80, 0x80, 0x80, 0x80, 0x80);
    private static readonly Vector128<byte> G2 = Vector128.Create((byte)0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 2, 5, 8, 11, 14);
    private static readonly Vector128<byte> B0 = Vector128.Create((byte)2, 5, 8, 11, 14, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80);
    private static readonly Vector128<byte> B1 = Vector128.Create((byte)0x80, 0x80, 0x80, 0x80, 0x80, 1, 4, 7, 10, 13, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80);
    private static readonly Vector128<byte> B2 = Vector128.Create((byte)0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0x80, 0, 3, 6, 9, 12, 15);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static Vector128<byte> Gather(Vector128<byte> a, Vector128<byte> m, Vector128<byte> z, (Vector128<byte>, Vector128<byte>, Vector128<byte>) pick) =>
        Vector128.ShuffleNative(a, pick.Item1) | Vector128.ShuffleNative(m, pick.Item2) | Vector128.ShuffleNative(z, pick.Item3);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void StoreScaled(Vector128<byte> channel, float k, float o, Span<float> to)
    {
        var scale = Vector128.Create(k);
        var offset = Vector128.Create(o);
        var (lo, hi) = Vector128.Widen(channel);
        var (q0, q1) = Vector128.Widen(lo);
        var (q2, q3) = Vector128.Widen(hi);
        ref float d = ref MemoryMarshal.GetReference(to);
        (Vector128.ConvertToSingle(q0.AsInt32()) * scale + offset).StoreUnsafe(ref d, 0);
        (Vector128.ConvertToSingle(q1.AsInt32()) * scale + offset).StoreUnsafe(ref d, 4);
        (Vector128.ConvertToSingle(q2.AsInt32()) * scale + offset).StoreUnsafe(ref d, 8);
        (Vector128.ConvertToSingle(q3.AsInt32()) * scale + offset).StoreUnsafe(ref d, 12);
    }

    private void PrepareColumns(int srcWidth, int dstWidth)
    {
        if (_x0.Length != dstWidth) { _x0 = new int[dstWidth]; _x1 = new int[dstWidth]; _wx = new float[dstWidth]; }
        double sx = (double)srcWidth / dstWidth;
        for (int x = 0; x < dstWidth; x++)
        {
            double fx = (x + 0.5) * sx - 0.5;
            if (fx < 0) fx = 0;
            int c0 = Math.Min((int)fx, srcWidth - 1);
            _x0[x] = c0;
            _x1[x] = Math.Min(c0 + 1, srcWidth - 1);
            _wx[x] = c0 == srcWidth - 1 ? 0f : (float)(fx - c0);
        }
    }

    private void InterpolateRow(ReadOnlySpan<Rgb24> top, ReadOnlySpan<Rgb24> bottom, float wy, float[] row)
    {
        int[] x0s = _x0, x1s = _x1;
        float[] wxs = _wx;
        for (int x = 0; x < x0s.Length; x++)
        {
            int i0 = x0s[x], i1 = x1s[x];
            Rgb24 a = top[i0], b = top[i1], c = bottom[i0], d = bottom[i1];
            float wx = wxs[x];
            row[3 * x] = Lerp2(a.R, b.R, c.R, d.R, wx, wy);
            row[3 * x + 1] = Lerp2(a.G, b.G, c.G, d.G, wx, wy);
            row[3 * x + 2] = Lerp2(a.B, b.B, c.B, d.B, wx, wy);
        }
    }

    private static float Lerp2(byte a, byte b, byte c, byte d, float wx, float wy)
    {
        float t = a + (b - a) * wx, u = c + (d - c) * wx;
        return t + (u - t) * wy;
    }

    private void Write(float[] rgbRow, int y, ContentBox box, Span<float> dst)
    {
        int w = box.ContentWidth;
        if (_nhwc)
        {
            var line = dst.Slice(y * box.InputWidth * 3, w * 3);
            for (int x = 0; x < w; x++)
                for (int c = 0; c < 3; c++)
                    line[3 * x + c] = rgbRow[3 * x + _sourceChannel[c]] * _scale[c] + _offset[c];
        }
        else
        {
            int plane = box.InputHeight * box.InputWidth;
            for (int c = 0; c < 3; c++)
            {
                var line = dst.Slice(c * plane + y * box.InputWidth, w);
                int s = _sourceChannel[c];
                float k = _scale[c], o = _offset[c];
                for (int x = 0; x < w; x++) line[x] = rgbRow[3 * x + s] * k + o;
            }
        }
    }
}
