namespace Strayspot.Service.Hosting;

/// <summary>A path the service refuses or cannot find; codes in <see cref="PathErrorCodes"/>.</summary>
public class PathException(string code, string message) : Strayspot.Scoring.CodedException(code, message);

/// <summary>A path from a request that would leave the folder it must stay in.</summary>
public sealed class UnsafePathException(string message) : PathException(PathErrorCodes.OutsideData, message);

/// <summary>The stable codes of <see cref="PathException"/>; never rename one.</summary>
public static class PathErrorCodes
{
    public const string OutsideData = "path-outside-data";
    public const string FolderNotFound = "folder-not-found";
}

/// <summary>
/// Resolves a path sent by a client below a root folder and refuses anything that would leave it:
/// <c>..</c> segments, absolute or drive-rooted paths, and symbolic links (on any component) pointing outside.
/// </summary>
public static class SafePath
{
    private const int MaxLinkHops = 40;

    public static string Resolve(string root, string relative)
    {
        ArgumentException.ThrowIfNullOrEmpty(root);
        if (string.IsNullOrWhiteSpace(relative))
            throw new UnsafePathException("The path is empty.");
        if (relative.Contains('\0'))
            throw new UnsafePathException("The path contains a NUL character.");
        if (Path.IsPathRooted(relative) || relative.StartsWith('/') || relative.StartsWith('\\') ||
            (relative.Length >= 2 && relative[1] == ':'))
            throw new UnsafePathException($"The path '{relative}' is absolute; give it relative to the data folder.");

        string[] parts = relative.Split(['/', '\\'], StringSplitOptions.RemoveEmptyEntries);
        foreach (string part in parts)
            if (part is ".." or ".")
                throw new UnsafePathException($"The path '{relative}' contains '{part}'; give it without relative steps.");

        string realRoot = ResolveAll(Path.GetFullPath(root));
        string current = realRoot;
        foreach (string part in parts)
        {
            current = RealPath(Path.Combine(current, part));
            if (!IsWithin(realRoot, current))
                throw new UnsafePathException($"The path '{relative}' leads outside the data folder through a link.");
        }
        return current;
    }

    public static bool IsWithin(string root, string path)
    {
        string r = Path.TrimEndingDirectorySeparator(root);
        return path.Equals(r, StringComparison.Ordinal) ||
               path.StartsWith(r + Path.DirectorySeparatorChar, StringComparison.Ordinal);
    }

    /// <summary>Follows links on the last component (chains included); parent components are already real.</summary>
    private static string RealPath(string path)
    {
        for (int hop = 0; hop < MaxLinkHops; hop++)
        {
            FileSystemInfo info = Directory.Exists(path) ? new DirectoryInfo(path) : new FileInfo(path);
            if (!info.Exists && info.LinkTarget is null) return path; // not there yet: nothing to follow
            string? target = info.LinkTarget;
            if (target is null) return path;
            string parent = Path.GetDirectoryName(path) ?? path;
            // A link's target may itself contain links in its parents: resolve them component by component.
            path = ResolveAll(Path.GetFullPath(target, parent));
        }
        throw new UnsafePathException($"Too many symbolic links while resolving '{path}'.");
    }

    private static string ResolveAll(string fullPath)
    {
        string? rootPart = Path.GetPathRoot(fullPath);
        string current = rootPart ?? "/";
        foreach (string part in fullPath[current.Length..].Split(Path.DirectorySeparatorChar, StringSplitOptions.RemoveEmptyEntries))
            current = RealPath(Path.Combine(current, part));
        return current;
    }
}

/// <summary>
/// Error text for clients: absolute server paths are shown relative to the folder the client knows (the data folder, a
/// batch folder, the models folder). The server log keeps the absolute paths.
/// </summary>
public static class ClientPaths
{
    /// <summary><paramref name="message"/> with every path under one of <paramref name="roots"/> made relative to it (most specific root first).</summary>
    public static string Relative(string message, params string?[] roots)
    {
        var forms = new List<string>();
        foreach (string? root in roots)
        {
            if (string.IsNullOrEmpty(root)) continue;
            string full = Path.TrimEndingDirectorySeparator(Path.GetFullPath(root));
            forms.Add(full);
            // Paths resolved through links (SafePath) name the real folder.
            try
            {
                if (Directory.ResolveLinkTarget(full, returnFinalTarget: true) is { } target)
                    forms.Add(Path.TrimEndingDirectorySeparator(target.FullName));
            }
            catch (IOException) { }
        }
        // Longest first, so a batch folder wins over the data folder that holds it.
        foreach (string root in forms.Distinct().OrderByDescending(r => r.Length))
        {
            if (root.Length <= 1) continue;
            message = message.Replace(root + Path.DirectorySeparatorChar, "", StringComparison.Ordinal);
            message = System.Text.RegularExpressions.Regex.Replace(message,
                System.Text.RegularExpressions.Regex.Escape(root) + @"(?![\w.-])", ".");
        }
        return message;
    }
}
