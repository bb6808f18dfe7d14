namespace Strayspot.Service;

/// <summary>Write to a temporary file beside the target, then rename: readers never see half a file.</summary>
public static class AtomicFile
{
    public static void WriteAllBytes(string path, byte[] bytes) => Write(path, s => s.Write(bytes));

    public static void Write(string path, Action<Stream> write)
    {
        string full = Path.GetFullPath(path);
        string temp = Path.Combine(Path.GetDirectoryName(full)!, $".{Path.GetFileName(full)}.{Guid.NewGuid():N}.tmp");
        try
        {
            using (var stream = new FileStream(temp, FileMode.CreateNew, FileAccess.Write, FileShare.None))
            {
                write(stream);
                stream.Flush(flushToDisk: true);
            }
            File.Move(temp, full, overwrite: true);
        }
        catch
        {
            try { File.Delete(temp); } catch (IOException) { }
            throw;
        }
    }
}
