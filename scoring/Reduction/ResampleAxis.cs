namespace Strayspot.Scoring.Reduction;

/// <summary>
/// Linear-interpolation taps along one axis, as ONNX <c>Resize</c> computes them with mode=linear and
/// coordinate_transformation_mode=half_pixel: source = (i + 0.5) / scale − 0.5 with scale = out/in in single
/// precision, clamped to [0, in − 1]; an output between two source samples blends them, one at the border repeats it.
/// Arithmetic stays in float and in the runtime's order so results match it to the last bits where possible.
/// </summary>
internal sealed class ResampleAxis
{
    private ResampleAxis(int inLength, int outLength, int paddedLength)
    {
        InLength = inLength;
        OutLength = outLength;
        Index0 = GC.AllocateUninitializedArray<int>(paddedLength, pinned: true);
        Index1 = GC.AllocateUninitializedArray<int>(paddedLength, pinned: true);
        Weight0 = GC.AllocateUninitializedArray<float>(paddedLength, pinned: true);
        Weight1 = GC.AllocateUninitializedArray<float>(paddedLength, pinned: true);
    }

    public int InLength { get; }
    public int OutLength { get; }
    public bool IsIdentity => InLength == OutLength;

    /// <summary>Lower source sample, upper source sample, and their weights, per output position.</summary>
    public int[] Index0 { get; }
    public int[] Index1 { get; }
    public float[] Weight0 { get; }
    public float[] Weight1 { get; }

    /// <summary>
    /// For blocks of <c>lanes</c> outputs whose taps all fall in one window of <c>lanes</c> consecutive source samples
    /// (any upsampling): the window start, and the taps relative to it, so one contiguous load plus a lane permute
    /// replaces a gather. <see cref="WindowStart"/> is −1 for a block that needs a gather.
    /// </summary>
    public int[] WindowStart { get; private set; } = [];
    public int[] Relative0 { get; private set; } = [];
    public int[] Relative1 { get; private set; } = [];

    public void BuildWindows(int lanes)
    {
        int blocks = Index0.Length / lanes;
        WindowStart = GC.AllocateUninitializedArray<int>(blocks, pinned: true);
        Relative0 = GC.AllocateUninitializedArray<int>(blocks * lanes, pinned: true);
        Relative1 = GC.AllocateUninitializedArray<int>(blocks * lanes, pinned: true);
        for (int b = 0; b < blocks; b++)
        {
            int lo = int.MaxValue, hi = int.MinValue;
            for (int l = b * lanes; l < (b + 1) * lanes; l++)
            {
                lo = Math.Min(lo, Math.Min(Index0[l], Index1[l]));
                hi = Math.Max(hi, Math.Max(Index0[l], Index1[l]));
            }
            int start = Math.Min(lo, InLength - lanes);
            bool fits = InLength >= lanes && hi - start < lanes;
            WindowStart[b] = fits ? start : -1;
            for (int l = b * lanes; l < (b + 1) * lanes; l++)
            {
                Relative0[l] = fits ? Index0[l] - start : 0;
                Relative1[l] = fits ? Index1[l] - start : 0;
            }
        }
    }

    /// <param name="paddedLength">At least <paramref name="outLength"/>; positions beyond it repeat the last sample
    /// so vector code may read whole blocks.</param>
    public static ResampleAxis Create(int inLength, int outLength, int paddedLength)
    {
        var axis = new ResampleAxis(inLength, outLength, Math.Max(paddedLength, outLength));
        float scale = (float)outLength / inLength;
        float last = inLength - 1;
        for (int i = 0; i < outLength; i++)
        {
            float source = inLength == outLength ? i : (i + 0.5f) / scale - 0.5f;
            source = Math.Max(0f, Math.Min(source, last));
            int i0 = Math.Min((int)source, inLength - 1);
            int i1 = Math.Min(i0 + 1, inLength - 1);
            float d0 = Math.Abs(source - i0), d1 = Math.Abs(source - i1);
            if (i0 == i1) { d0 = 0.5f; d1 = 0.5f; }
            axis.Index0[i] = i0;
            axis.Index1[i] = i1;
            // The weight of a sample is the distance to the other one.
            axis.Weight0[i] = d1;
            axis.Weight1[i] = d0;
        }
        for (int i = outLength; i < axis.Index0.Length; i++)
        {
            axis.Index0[i] = axis.Index0[outLength - 1];
            axis.Index1[i] = axis.Index0[outLength - 1];
            axis.Weight0[i] = 1f;
            axis.Weight1[i] = 0f;
        }
        return axis;
    }
}
