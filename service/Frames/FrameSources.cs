using Strayspot.Service.Models;

namespace Strayspot.Service.Frames;

/// <summary>The image formats a frame may come in: the one list every source, listing and message uses.</summary>
public static class FrameFormats
{
    public static IReadOnlyList<string> Extensions { get; } = [".png", ".jpg", ".jpeg", ".webp"];

    public static bool IsFrameFile(string path) => Extensions.Contains(Path.GetExtension(path).ToLowerInvariant());

    /// <summary>"png/jpg/jpeg/webp", for messages.</summary>
    public static string Listed => string.Join("/", Extensions.Select(e => e.TrimStart('.')));
}

/// <summary>
/// One frame of a source, not yet decoded: a stable <see cref="Id"/> (its path relative to the source, with '/'),
/// its place in the source and, for sources with a clock (recordings), its time from the start.
/// </summary>
public sealed record SourceFrame(string Id, int Index, TimeSpan? Timestamp, string? Path, Func<FrameDecoder, DecodedFrame> Decode)
{
    /// <summary>An archive's frame: the archive's path and the entry, <c>ARCHIVE!ENTRY</c> (its <see cref="Path"/> is a temporary copy).</summary>
    public string? InArchive { get; init; }

    /// <summary>How reports name the frame to the user: inside its archive, else its file, else its id.</summary>
    public string Shown => InArchive ?? Path ?? Id;
}

/// <summary>Where frames come from: a file, a folder, an archive, an upload; later a recording. Frames stream in order.</summary>
public interface IFrameSource
{
    /// <summary>What the user named (a path or an upload's name), for messages.</summary>
    string Name { get; }

    IEnumerable<SourceFrame> Frames();
}

/// <summary>One image file; its id is the file name.</summary>
public sealed class FileFrameSource(string path) : IFrameSource
{
    public string Name { get; } = System.IO.Path.GetFullPath(path);

    public IEnumerable<SourceFrame> Frames()
    {
        yield return new SourceFrame(System.IO.Path.GetFileName(Name), 0, null, Name, d => d.DecodeFile(Name));
    }
}

/// <summary>
/// The frame files under a folder, in ordinal order of their relative paths (ids). Subfolders are walked unless told
/// otherwise; hidden files and folders (a name starting with '.') are skipped.
/// </summary>
public sealed class FolderFrameSource(string folder, bool recursive = true) : IFrameSource
{
    private static readonly EnumerationOptions Walk = new() { RecurseSubdirectories = true, IgnoreInaccessible = true, AttributesToSkip = FileAttributes.System };
    private static readonly EnumerationOptions Flat = new() { RecurseSubdirectories = false, IgnoreInaccessible = true, AttributesToSkip = FileAttributes.System };

    public string Name { get; } = System.IO.Path.GetFullPath(folder);

    public IEnumerable<SourceFrame> Frames()
    {
        if (!Directory.Exists(Name))
            throw new Hosting.PathException(Hosting.PathErrorCodes.FolderNotFound, $"Frames folder '{folder}' does not exist.");
        var files = new List<(string Id, string Path)>();
        foreach (string file in Directory.EnumerateFiles(Name, "*", recursive ? Walk : Flat))
        {
            string rel = System.IO.Path.GetRelativePath(Name, file).Replace('\\', '/');
            if (!FrameFormats.IsFrameFile(file) || rel.Split('/').Any(p => p.StartsWith('.'))) continue;
            files.Add((rel, file));
        }
        files.Sort((a, b) => string.CompareOrdinal(a.Id, b.Id));
        for (int i = 0; i < files.Count; i++)
        {
            string path = files[i].Path;
            yield return new SourceFrame(files[i].Id, i, null, path, d => d.DecodeFile(path));
        }
    }
}

/// <summary>A .zip or .tar(.gz) of frames, unpacked (with the batch archive's checks) into a folder the caller owns.</summary>
public sealed class ArchiveFrameSource(string archivePath, string unpackInto, Batches.ArchiveLimits limits) : IFrameSource
{
    /// <summary>Between an archive's path and an entry's name (archive paths end in .zip or .tar, so it cannot be misread).</summary>
    public const char EntrySeparator = '!';

    public string Name { get; } = System.IO.Path.GetFullPath(archivePath);

    public IEnumerable<SourceFrame> Frames()
    {
        Batches.BatchArchive.Extract(Name, System.IO.Path.GetFileName(Name), unpackInto, limits);
        return new FolderFrameSource(unpackInto).Frames().Select(f => f with { InArchive = Name + EntrySeparator + f.Id });
    }
}

/// <summary>One uploaded image held in memory.</summary>
public sealed class UploadFrameSource(string name, ReadOnlyMemory<byte> bytes) : IFrameSource
{
    public string Name { get; } = name;

    public IEnumerable<SourceFrame> Frames()
    {
        yield return new SourceFrame(Name, 0, null, null, d => d.Decode(bytes, Name));
    }
}

/// <summary>Frame sources from what a user typed: files, folders (walked) and archives.</summary>
public static class FrameSources
{
    private static readonly string[] ArchiveEndings = [".zip", ".tar", ".tar.gz", ".tgz"];

    /// <summary>One source per path; fails listing every missing path at once.</summary>
    public static IReadOnlyList<IFrameSource> FromPaths(IEnumerable<string> paths, string? unpackRoot = null)
    {
        var sources = new List<IFrameSource>();
        var missing = new List<string>();
        foreach (string path in paths)
        {
            if (Directory.Exists(path)) sources.Add(new FolderFrameSource(path));
            else if (File.Exists(path) && ArchiveEndings.Any(e => path.EndsWith(e, StringComparison.OrdinalIgnoreCase)))
                sources.Add(new ArchiveFrameSource(path,
                    System.IO.Path.Combine(unpackRoot ?? System.IO.Path.GetTempPath(), "strayspot-frames-" + Guid.NewGuid().ToString("N")),
                    new Batches.ArchiveLimits(100_000, 20L << 30)));
            else if (File.Exists(path)) sources.Add(new FileFrameSource(path));
            else missing.Add(path);
        }
        if (missing.Count > 0)
            throw new FrameException(FrameErrorCodes.Missing, $"No such frame file or folder: {string.Join(", ", missing)}.");
        return sources;
    }
}
