using System.Formats.Tar;
using System.IO.Compression;
using Strayspot.Service.Api;
using Strayspot.Service.Calibration;

namespace Strayspot.Service.Batches;

/// <summary>Limits on an uploaded archive: entries (directories included) and uncompressed bytes.</summary>
public sealed record ArchiveLimits(int MaxEntries, long MaxBytes);

/// <summary>
/// Unpacks an uploaded .zip or .tar (optionally gzip-compressed) of frames into a folder. Refused: entry names that are
/// absolute or step up with <c>..</c>, links of any kind, devices, duplicate names; more entries or more uncompressed
/// bytes than allowed (declared sizes are checked before anything is written, actual bytes while writing).
/// Entries that are not frames (by extension) or are hidden (a name part starting with '.') are skipped.
/// </summary>
public static class BatchArchive
{
    private const int UnixLinkMode = 0xA000;
    private const int UnixTypeMask = 0xF000;

    /// <summary>Extracts into <paramref name="destination"/> (created) and returns the frames' relative paths ('/'-separated).</summary>
    public static List<string> Extract(string archivePath, string? fileName, string destination, ArchiveLimits limits)
    {
        Directory.CreateDirectory(destination);
        byte[] head = new byte[512];
        int read;
        using (var probe = File.OpenRead(archivePath)) read = probe.ReadAtLeast(head, head.Length, throwOnEndOfStream: false);
        try
        {
            if (read >= 4 && head[0] == 'P' && head[1] == 'K' && (head[2] == 3 || head[2] == 5) && (head[3] == 4 || head[3] == 6))
                return ExtractZip(archivePath, destination, limits);
            if (read >= 2 && head[0] == 0x1f && head[1] == 0x8b)
            {
                using var file = File.OpenRead(archivePath);
                using var gz = new GZipStream(file, CompressionMode.Decompress);
                return ExtractTar(gz, destination, limits);
            }
            bool ustar = read >= 262 && head[257] == 'u' && head[258] == 's' && head[259] == 't' && head[260] == 'a' && head[261] == 'r';
            if (ustar || (fileName?.EndsWith(".tar", StringComparison.OrdinalIgnoreCase) ?? false))
            {
                using var file = File.OpenRead(archivePath);
                return ExtractTar(file, destination, limits);
            }
        }
        catch (Exception e) when (e is InvalidDataException or FormatException or EndOfStreamException or NotSupportedException)
        {
            throw new BatchException(ErrorCodes.ArchiveInvalid, $"The archive cannot be read: {e.Message}");
        }
        if (fileName is not null && Recordings.VideoRecording.IsVideoFile(fileName))
            return [BatchRecordings.TakeUpload(archivePath, CheckName(Path.GetFileName(fileName), out _), destination, limits.MaxBytes)];
        throw new BatchException(ErrorCodes.ArchiveInvalid,
            $"The upload{(fileName is null ? "" : $" '{fileName}'")} is neither a .zip nor a .tar (or .tar.gz) archive, nor a video file.");
    }

    private static List<string> ExtractZip(string archivePath, string destination, ArchiveLimits limits)
    {
        using var zip = ZipFile.OpenRead(archivePath);
        if (zip.Entries.Count > limits.MaxEntries)
            throw TooMany(zip.Entries.Count, limits);
        long declared = 0;
        foreach (var e in zip.Entries)
        {
            CheckName(e.FullName, out _);
            int mode = (e.ExternalAttributes >> 16) & UnixTypeMask;
            if (mode == UnixLinkMode)
                throw new BatchException(ErrorCodes.ArchiveEscape, $"Archive entry '{e.FullName}' is a symbolic link; links are not accepted.");
            declared += e.Length;
            if (declared > limits.MaxBytes) throw TooBig(declared, limits, declaredSize: true);
        }
        var frames = new List<string>();
        var budget = new Budget(limits);
        foreach (var e in zip.Entries)
        {
            var parts = CheckName(e.FullName, out bool directory);
            if (directory || !IsFrame(parts)) continue;
            using var source = e.Open();
            frames.Add(WriteEntry(source, parts, destination, budget, e));
        }
        return frames;
    }

    private static List<string> ExtractTar(Stream stream, string destination, ArchiveLimits limits)
    {
        using var tar = new TarReader(stream);
        var frames = new List<string>();
        var budget = new Budget(limits);
        int entries = 0;
        while (tar.GetNextEntry(copyData: false) is { } e)
        {
            if (++entries > limits.MaxEntries) throw TooMany(entries, limits, atLeast: true);
            var parts = CheckName(e.Name, out bool directory);
            switch (e.EntryType)
            {
                case TarEntryType.SymbolicLink or TarEntryType.HardLink:
                    throw new BatchException(ErrorCodes.ArchiveEscape, $"Archive entry '{e.Name}' is a link; links are not accepted.");
                case TarEntryType.Directory:
                    continue;
                case TarEntryType.RegularFile or TarEntryType.V7RegularFile or TarEntryType.ContiguousFile:
                    break;
                default:
                    throw new BatchException(ErrorCodes.ArchiveInvalid, $"Archive entry '{e.Name}' is a {e.EntryType}; only files and folders are accepted.");
            }
            if (directory || !IsFrame(parts) || e.DataStream is null) continue;
            if (e.Length > limits.MaxBytes - budget.Used) throw TooBig(budget.Used + e.Length, limits, declaredSize: true);
            frames.Add(WriteEntry(e.DataStream, parts, destination, budget));
        }
        return frames;
    }

    /// <summary>The entry's name parts, '.' parts dropped; refuses absolute names, '..' and NUL.</summary>
    public static string[] CheckName(string name, out bool directory)
    {
        if (string.IsNullOrEmpty(name) || name.Contains('\0'))
            throw new BatchException(ErrorCodes.ArchiveEscape, "An archive entry has an empty name or a NUL character.");
        if (name[0] is '/' or '\\' || (name.Length >= 2 && name[1] == ':'))
            throw new BatchException(ErrorCodes.ArchiveEscape, $"Archive entry '{name}' has an absolute path; entries must be relative.");
        directory = name[^1] is '/' or '\\';
        var parts = name.Split(['/', '\\'], StringSplitOptions.RemoveEmptyEntries).Where(p => p != ".").ToArray();
        if (parts.Contains(".."))
            throw new BatchException(ErrorCodes.ArchiveEscape, $"Archive entry '{name}' steps out of its folder with '..'.");
        if (parts.Length == 0) directory = true;
        return parts;
    }

    private static bool IsFrame(string[] parts) =>
        parts.Length > 0 && !parts.Any(p => p.StartsWith('.')) && BatchRecordings.IsInput(parts[^1]);

    /// <param name="zipEntry">A zip entry's header, whose size and CRC-32 the written bytes must match.</param>
    private static string WriteEntry(Stream source, string[] parts, string destination, Budget budget, ZipArchiveEntry? zipEntry = null)
    {
        string path = Path.GetFullPath(Path.Combine([destination, .. parts]));
        if (!path.StartsWith(Path.TrimEndingDirectorySeparator(Path.GetFullPath(destination)) + Path.DirectorySeparatorChar, StringComparison.Ordinal))
            throw new BatchException(ErrorCodes.ArchiveEscape, $"Archive entry '{string.Join('/', parts)}' would land outside its folder.");
        string relative = string.Join('/', parts);
        if (File.Exists(path))
            throw new BatchException(ErrorCodes.ArchiveInvalid, $"Archive entry '{relative}' appears more than once.");
        Directory.CreateDirectory(Path.GetDirectoryName(path)!);
        var crc = new System.IO.Hashing.Crc32();
        long written = 0;
        using (var target = new FileStream(path, FileMode.CreateNew, FileAccess.Write))
        {
            byte[] buffer = new byte[81920];
            int n;
            while ((n = source.Read(buffer, 0, buffer.Length)) > 0)
            {
                budget.Take(n);
                target.Write(buffer, 0, n);
                crc.Append(buffer.AsSpan(0, n));
                written += n;
            }
            target.Flush(flushToDisk: true);
        }
        if (zipEntry is not null && (written != zipEntry.Length || crc.GetCurrentHashAsUInt32() != zipEntry.Crc32))
        {
            // Headers that understate an entry would otherwise cut it silently at the declared size.
            File.Delete(path);
            throw new BatchException(ErrorCodes.ArchiveInvalid,
                written != zipEntry.Length
                    ? $"Archive entry '{relative}' unpacks to {written} bytes but its header declares {zipEntry.Length}."
                    : $"Archive entry '{relative}' fails its CRC-32 check (damaged, or its header does not describe its data).");
        }
        return relative;
    }

    private static BatchException TooMany(int entries, ArchiveLimits limits, bool atLeast = false) =>
        new(ErrorCodes.ArchiveTooLarge,
            $"The archive holds {(atLeast ? "more than " + (entries - 1) : entries.ToString(System.Globalization.CultureInfo.InvariantCulture))} entries; " +
            $"at most {limits.MaxEntries} are accepted (Service:Batches:MaxArchiveEntries).");

    private static BatchException TooBig(long bytes, ArchiveLimits limits, bool declaredSize) =>
        new(ErrorCodes.ArchiveTooLarge,
            $"The archive {(declaredSize ? "declares" : "unpacks to")} at least {bytes} uncompressed bytes; " +
            $"at most {limits.MaxBytes} are accepted (Service:Batches:MaxArchiveBytes).");

    /// <summary>Counts bytes actually written: a declared size may lie.</summary>
    private sealed class Budget(ArchiveLimits limits)
    {
        public long Used { get; private set; }

        public void Take(int n)
        {
            Used += n;
            if (Used > limits.MaxBytes) throw TooBig(Used, limits, declaredSize: false);
        }
    }
}
