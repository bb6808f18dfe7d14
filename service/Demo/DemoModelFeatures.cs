namespace Strayspot.Service.Demo;

/// <summary>
/// The demo model's fixed filters, computed directly (the ONNX graph computes the same with standard operators):
/// colour means over 4×4 cells (stride 4), their 5×5 neighbourhood mean, the mean gradient magnitude of grey over each
/// cell (texture, log scale), its 5×5 neighbourhood mean, 15×15 neighbourhood means of colour and texture (the
/// surroundings a larger network would see), and the cell row's height in the frame, (row + 0.5) / rows (the prior a
/// convolutional network learns from padding: sky above, ground below), and the largest chroma (max − min of R, G, B)
/// of any pixel in the cell (a few saturated pixels stand out even where the cell mean is the ground's). Output is
/// [Count, H/4, W/4] planar, channels in that order.
/// </summary>
public static class DemoFeatures
{
    public const int Stride = 4;
    public const int Context = 5;
    public const int Count = 14;
    public const int WideContext = 15;
    public const float GradientEpsilon = 1e-6f;
    public static readonly float[] GreyWeights = [0.299f, 0.587f, 0.114f];

    /// <summary>Sobel kernels scaled by 1/8, applied as cross-correlation with zero padding (as ONNX Conv does).</summary>
    public static readonly float[] SobelX = [-0.125f, 0f, 0.125f, -0.25f, 0f, 0.25f, -0.125f, 0f, 0.125f];
    public static readonly float[] SobelY = [-0.125f, -0.25f, -0.125f, 0f, 0f, 0f, 0.125f, 0.25f, 0.125f];

    /// <summary>Planar [3,H,W] floats in 0..1 from interleaved RGB bytes: the model's input tensor.</summary>
    public static float[] ToInput(ReadOnlySpan<byte> rgb, int width, int height)
    {
        int n = width * height;
        var input = new float[3 * n];
        for (int i = 0; i < n; i++)
        {
            input[i] = rgb[3 * i] / 255f;
            input[n + i] = rgb[3 * i + 1] / 255f;
            input[2 * n + i] = rgb[3 * i + 2] / 255f;
        }
        return input;
    }

    public static float[] Compute(ReadOnlySpan<float> input, int height, int width, out int outHeight, out int outWidth)
    {
        int n = width * height;
        if (input.Length != 3 * n) throw new ArgumentException($"Input has {input.Length} values, expected 3x{height}x{width}.", nameof(input));
        int h = height / Stride, w = width / Stride;
        if (h == 0 || w == 0) throw new ArgumentException($"Input {height}x{width} is smaller than one {Stride}x{Stride} cell.", nameof(input));
        outHeight = h;
        outWidth = w;
        int m = h * w;
        var features = new float[Count * m];

        for (int c = 0; c < 3; c++)
            CellMean(input.Slice(c * n, n), height, width, features.AsSpan(c * m, m), h, w);

        var grey = new float[n];
        for (int i = 0; i < n; i++)
            grey[i] = input[i] * GreyWeights[0] + input[n + i] * GreyWeights[1] + input[2 * n + i] * GreyWeights[2];
        var magnitude = new float[n];
        for (int y = 0; y < height; y++)
            for (int x = 0; x < width; x++)
            {
                float gx = 0, gy = 0;
                for (int ky = 0; ky < 3; ky++)
                {
                    int yy = y + ky - 1;
                    if ((uint)yy >= (uint)height) continue;
                    for (int kx = 0; kx < 3; kx++)
                    {
                        int xx = x + kx - 1;
                        if ((uint)xx >= (uint)width) continue;
                        float v = grey[yy * width + xx];
                        gx += SobelX[ky * 3 + kx] * v;
                        gy += SobelY[ky * 3 + kx] * v;
                    }
                }
                magnitude[y * width + x] = MathF.Sqrt(gx * gx + gy * gy + GradientEpsilon);
            }
        var texture = features.AsSpan(6 * m, m);
        CellMean(magnitude, height, width, texture, h, w);
        // Log scale: grain, foliage and edges differ by orders of magnitude, and lighting scales them all alike.
        for (int i = 0; i < m; i++) texture[i] = MathF.Log(texture[i]);

        NeighbourhoodMean(features.AsSpan(0, m), features.AsSpan(3 * m, m), h, w, Context);
        NeighbourhoodMean(features.AsSpan(m, m), features.AsSpan(4 * m, m), h, w, Context);
        NeighbourhoodMean(features.AsSpan(2 * m, m), features.AsSpan(5 * m, m), h, w, Context);
        NeighbourhoodMean(features.AsSpan(6 * m, m), features.AsSpan(7 * m, m), h, w, Context);
        NeighbourhoodMean(features.AsSpan(0, m), features.AsSpan(8 * m, m), h, w, WideContext);
        NeighbourhoodMean(features.AsSpan(m, m), features.AsSpan(9 * m, m), h, w, WideContext);
        NeighbourhoodMean(features.AsSpan(2 * m, m), features.AsSpan(10 * m, m), h, w, WideContext);
        NeighbourhoodMean(features.AsSpan(6 * m, m), features.AsSpan(11 * m, m), h, w, WideContext);
        var row = features.AsSpan(12 * m, m);
        for (int y = 0; y < h; y++) row.Slice(y * w, w).Fill((y + 0.5f) / h);
        var chroma = features.AsSpan(13 * m, m);
        for (int cy = 0; cy < h; cy++)
            for (int cx = 0; cx < w; cx++)
            {
                float most = float.NegativeInfinity;
                for (int dy = 0; dy < Stride; dy++)
                    for (int dx = 0; dx < Stride; dx++)
                    {
                        int i = (cy * Stride + dy) * width + cx * Stride + dx;
                        float r = input[i], g = input[n + i], b = input[2 * n + i];
                        most = MathF.Max(most, MathF.Max(r, MathF.Max(g, b)) - MathF.Min(r, MathF.Min(g, b)));
                    }
                chroma[cy * w + cx] = most;
            }
        return features;
    }

    private static void CellMean(ReadOnlySpan<float> plane, int height, int width, Span<float> output, int h, int w)
    {
        for (int cy = 0; cy < h; cy++)
            for (int cx = 0; cx < w; cx++)
            {
                float sum = 0;
                for (int dy = 0; dy < Stride; dy++)
                    for (int dx = 0; dx < Stride; dx++)
                        sum += plane[(cy * Stride + dy) * width + cx * Stride + dx];
                output[cy * w + cx] = sum / (Stride * Stride);
            }
    }

    /// <summary>size×size mean over the cells that exist (border cells average fewer neighbours).</summary>
    private static void NeighbourhoodMean(ReadOnlySpan<float> plane, Span<float> output, int h, int w, int size)
    {
        int r = size / 2;
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++)
            {
                float sum = 0;
                int count = 0;
                for (int yy = Math.Max(0, y - r); yy <= Math.Min(h - 1, y + r); yy++)
                    for (int xx = Math.Max(0, x - r); xx <= Math.Min(w - 1, x + r); xx++)
                    {
                        sum += plane[yy * w + xx];
                        count++;
                    }
                output[y * w + x] = sum / count;
            }
    }

    /// <summary>The most frequent class in each Stride×Stride cell, ignoring 255; 255 when the cell has no labelled pixel.</summary>
    public static byte[] CellLabels(ReadOnlySpan<byte> labels, int height, int width, int classCount)
    {
        int h = height / Stride, w = width / Stride;
        var output = new byte[h * w];
        Span<int> votes = stackalloc int[classCount];
        for (int cy = 0; cy < h; cy++)
            for (int cx = 0; cx < w; cx++)
            {
                votes.Clear();
                for (int dy = 0; dy < Stride; dy++)
                    for (int dx = 0; dx < Stride; dx++)
                    {
                        byte l = labels[(cy * Stride + dy) * width + cx * Stride + dx];
                        if (l < classCount) votes[l]++;
                    }
                int best = -1, bestVotes = 0;
                for (int c = 0; c < classCount; c++)
                    if (votes[c] > bestVotes) { best = c; bestVotes = votes[c]; }
                output[cy * w + cx] = best < 0 ? (byte)255 : (byte)best;
            }
        return output;
    }
}
