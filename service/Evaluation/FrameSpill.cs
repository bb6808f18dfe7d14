using System.Runtime.InteropServices;

namespace Strayspot.Service.Evaluation;

/// <summary>
/// The primary method's score map, predicted classes and anomaly labels of every frame, written to a temporary file
/// during the pass over the model and read back once the operating point is known. Region metrics and per-frame
/// rows need the threshold, which needs every frame first: the spill keeps memory flat instead of holding all maps.
/// 7 bytes per pixel on disk; the file is deleted when the spill is disposed.
/// </summary>
internal sealed class FrameSpill : IDisposable
{
    private readonly FileStream _file;
    private readonly string _path;

    public FrameSpill(string folder)
    {
        Directory.CreateDirectory(folder);
        _path = Path.Combine(folder, $".evaluation-spill-{Guid.NewGuid():N}.tmp");
        _file = new FileStream(_path, FileMode.CreateNew, FileAccess.ReadWrite, FileShare.None, 1 << 20,
            FileOptions.DeleteOnClose | FileOptions.SequentialScan);
    }

    public int Frames { get; private set; }

    public void Write(int width, int height, ReadOnlySpan<float> score, ReadOnlySpan<ushort> classIndex, ReadOnlySpan<byte> labels)
    {
        Span<int> size = [width, height];
        _file.Write(MemoryMarshal.AsBytes(size));
        _file.Write(MemoryMarshal.AsBytes(score));
        _file.Write(MemoryMarshal.AsBytes(classIndex));
        _file.Write(labels);
        Frames++;
    }

    /// <summary>Reads the frames back in order; the buffers passed to <paramref name="visit"/> are reused.</summary>
    public void ReadAll(SpillVisitor visit)
    {
        _file.Flush();
        _file.Position = 0;
        float[] score = [];
        ushort[] classes = [];
        byte[] labels = [];
        Span<int> size = stackalloc int[2];
        for (int f = 0; f < Frames; f++)
        {
            _file.ReadExactly(MemoryMarshal.AsBytes(size));
            int n = size[0] * size[1];
            if (score.Length < n) { score = new float[n]; classes = new ushort[n]; labels = new byte[n]; }
            _file.ReadExactly(MemoryMarshal.AsBytes(score.AsSpan(0, n)));
            _file.ReadExactly(MemoryMarshal.AsBytes(classes.AsSpan(0, n)));
            _file.ReadExactly(labels.AsSpan(0, n));
            visit(f, size[0], size[1], score.AsSpan(0, n), classes.AsSpan(0, n), labels.AsSpan(0, n));
        }
    }

    public void Dispose() => _file.Dispose();
}

internal delegate void SpillVisitor(int frame, int width, int height, ReadOnlySpan<float> score, ReadOnlySpan<ushort> classIndex, ReadOnlySpan<byte> labels);
