using Strayspot.Service.Models;

namespace Strayspot.Service.Recordings;

/// <summary>
/// Where the ffmpeg and ffprobe programs are: <c>STRAYSPOT_FFMPEG_DIR</c> when set, otherwise the PATH.
/// Debian's <c>ffmpeg</c> package brings both.
/// </summary>
public sealed record FfmpegTools(string Ffmpeg, string Ffprobe)
{
    public const string FolderVariable = "STRAYSPOT_FFMPEG_DIR";
    public const string Package = "ffmpeg";

    /// <summary>Finds both programs in <paramref name="folder"/> (or the variable, or the PATH) or throws naming the package.</summary>
    public static FfmpegTools Locate(string? folder = null)
    {
        folder ??= Environment.GetEnvironmentVariable(FolderVariable);
        IEnumerable<string> places = !string.IsNullOrEmpty(folder)
            ? [folder]
            : (Environment.GetEnvironmentVariable("PATH") ?? "").Split(Path.PathSeparator, StringSplitOptions.RemoveEmptyEntries);
        string? ffmpeg = null, ffprobe = null;
        foreach (string place in places)
        {
            ffmpeg ??= Executable(Path.Combine(place, "ffmpeg"));
            ffprobe ??= Executable(Path.Combine(place, "ffprobe"));
        }
        if (ffmpeg is null || ffprobe is null)
            throw new ModelException(RecordingErrorCodes.DecoderMissing,
                $"Video needs the ffmpeg and ffprobe programs, which were not found {(string.IsNullOrEmpty(folder) ? "on the PATH" : $"in {folder}")}: " +
                $"install the '{Package}' package (Debian: apt-get install {Package}) or set {FolderVariable} to the folder holding them.");
        return new FfmpegTools(ffmpeg, ffprobe);
    }

    private static string? Executable(string path)
    {
        if (OperatingSystem.IsWindows()) return File.Exists(path + ".exe") ? path + ".exe" : null;
        return File.Exists(path) && (File.GetUnixFileMode(path) & (UnixFileMode.UserExecute | UnixFileMode.GroupExecute | UnixFileMode.OtherExecute)) != 0
            ? path : null;
    }
}
