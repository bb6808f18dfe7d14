using System.Diagnostics;
using System.Net;
using System.Net.Sockets;
using System.Text.RegularExpressions;

namespace Strayspot.Tests.Docker;

/// <summary>
/// The Dockerfile is checked statically, and its publish step (the same script) run for real, with the published
/// executable smoke-tested on the demo. Building and running the image needs a container engine: those tests are
/// skipped, with the reason, where none answers.
/// </summary>
public sealed partial class ContainerTests
{
    private static string RepoRoot([System.Runtime.CompilerServices.CallerFilePath] string here = "") =>
        Path.GetFullPath(Path.Combine(Path.GetDirectoryName(here)!, "..", ".."));

    private static readonly string Dockerfile = File.ReadAllText(Path.Combine(RepoRoot(), "docker", "Dockerfile"));

    [Fact]
    public void Base_images_are_official_dotnet_images_pinned_to_a_patch_version_and_not_alpine()
    {
        var froms = FromLine().Matches(Dockerfile).Select(m => m.Groups[1].Value).ToList();
        Assert.Equal(2, froms.Count);
        foreach (string image in froms)
        {
            Assert.StartsWith("mcr.microsoft.com/dotnet/", image);
            Assert.Matches(@":\d+\.\d+\.\d+-", image);
            Assert.DoesNotContain("alpine", image);
            Assert.DoesNotContain(":latest", image);
        }
        // The runtime installs ffmpeg with apt: the plain Ubuntu ASP.NET image (a chiseled one has no package manager).
        Assert.Matches(@"^mcr\.microsoft\.com/dotnet/aspnet:\d+\.\d+\.\d+-noble$", froms[^1]);
    }

    [Fact]
    public void The_runtime_installs_ffmpeg_without_recommends_and_leaves_no_package_lists_before_dropping_root()
    {
        string runtime = Dockerfile[FromLine().Matches(Dockerfile)[^1].Index..];
        var install = RunLine().Matches(runtime).Select(m => m.Value).SingleOrDefault(r => r.Contains("apt-get install"));
        Assert.NotNull(install);
        Assert.Matches(@"apt-get update\b", install);
        Assert.Matches(@"apt-get install -y --no-install-recommends ffmpeg\s*\\", install);
        // Cleaned in the same layer, or the lists stay in the image.
        Assert.Contains("rm -rf /var/lib/apt/lists/*", install);
        Assert.True(runtime.IndexOf(install, StringComparison.Ordinal) < runtime.LastIndexOf("USER ", StringComparison.Ordinal),
            "ffmpeg is installed as root, before the image drops to the app user");
    }

    [DockerFact]
    public async Task The_image_scores_a_video_as_the_app_user_on_a_read_only_root_filesystem()
    {
        string root = Directory.CreateTempSubdirectory("strayspot-image-").FullName;
        const string tag = "strayspot-test:recordings";
        try
        {
            var build = await Run("docker", ["build", "-f", Path.Combine(RepoRoot(), "docker", "Dockerfile"), "-t", tag, RepoRoot()], TimeSpan.FromMinutes(15));
            Assert.True(build.ExitCode == 0, build.Output);
            var drive = new Strayspot.Service.Demo.ApronDriveBy(frameWidth: 256, frameHeight: 128, panoramaWidth: 320, step: 16, debris: 2);
            string data = Directory.CreateDirectory(Path.Combine(root, "data")).FullName;
            Strayspot.Tests.Support.VideoFiles.EncodeMp4(Path.Combine(data, "pass.mp4"), 256, 128, drive.FrameRate,
                Enumerable.Range(0, drive.FrameCount).Select(drive.Rgb));
            // World-writable so the image's app user (UID 1654) can write its outputs into the bind mount.
            File.SetUnixFileMode(data, (UnixFileMode)0b111_111_111);
            var run = await Run("docker", ["run", "--rm", "--read-only", "--tmpfs", "/tmp", "--network", "none",
                "-v", $"{Strayspot.Tests.Service.Demo.DemoFixture.CommittedFolder}:/models/demo:ro", "-v", $"{data}:/data", tag,
                "score", "/models/demo", "/data/pass.mp4", "--out", "/data/out", "--threads", "1"], TimeSpan.FromMinutes(3));
            Assert.True(run.ExitCode == 0, run.Output);
            Assert.Contains("recording pass:", run.Output);
            Assert.True(File.Exists(Path.Combine(data, "out", "pass", "tracks.json")));
            var user = await Run("docker", ["run", "--rm", "--entrypoint", "id", tag, "-u"], TimeSpan.FromMinutes(1));
            Assert.Equal("1654", user.Output.Trim());
        }
        finally
        {
            await Run("docker", ["image", "rm", "-f", tag], TimeSpan.FromMinutes(1));
            Directory.Delete(root, recursive: true);
        }
    }

    [Fact]
    public void Runs_as_the_non_root_app_user_with_a_health_check_through_our_own_executable()
    {
        var user = UserLine().Matches(Dockerfile).Select(m => m.Groups[1].Value.Trim()).ToList();
        Assert.NotEmpty(user);
        Assert.True(user[^1] is "$APP_UID" or "1654" or "app", $"last USER is {user[^1]}");
        Assert.Matches(@"HEALTHCHECK[^\n]*\\\s*\n\s*CMD \[""/app/strayspot"", ""healthcheck""", Dockerfile);
        Assert.DoesNotContain("curl", Dockerfile);
        Assert.Contains("RUN bash docker/publish.sh /app", Dockerfile);
    }

    [Fact]
    public void No_secret_is_baked_into_the_image()
    {
        foreach (Match m in EnvOrArg().Matches(Dockerfile))
            Assert.DoesNotMatch(@"(?i)(secret|password|token|apikeys__\d+__sha256)\s*=", m.Value);
    }

    [Fact]
    public async Task Published_output_runs_the_demo_and_answers_its_own_health_check()
    {
        string root = Directory.CreateTempSubdirectory("strayspot-publish-").FullName;
        try
        {
            string app = Path.Combine(root, "app");
            var publish = await Run("bash", [Path.Combine(RepoRoot(), "docker", "publish.sh"), app], TimeSpan.FromMinutes(6));
            Assert.True(publish.ExitCode == 0, publish.Output);
            string exe = Path.Combine(app, "strayspot");
            Assert.True(File.Exists(exe));

            var demo = await Run(exe, ["demo", "--out", Path.Combine(root, "demo")], TimeSpan.FromMinutes(2));
            Assert.True(demo.ExitCode == 0, demo.Output);
            Assert.True(File.Exists(Path.Combine(root, "demo", "scores", "ranking.json")));

            // The container's command, on loopback: models from the demo, health check by our own verb.
            string models = Path.Combine(root, "models");
            Directory.Move(Path.Combine(root, "demo", "model"), Directory.CreateDirectory(models).FullName + "/demo");
            int port = FreePort();
            using var server = Process.Start(new ProcessStartInfo(exe, ["serve", "--models", models, "--data", Path.Combine(root, "data"), "--urls", $"http://127.0.0.1:{port}"])
            { RedirectStandardOutput = true, RedirectStandardError = true })!;
            try
            {
                server.OutputDataReceived += (_, _) => { };
                server.ErrorDataReceived += (_, _) => { };
                server.BeginOutputReadLine();
                server.BeginErrorReadLine();
                int health = 1;
                for (int i = 0; i < 60 && health != 0; i++)
                {
                    await Task.Delay(500);
                    health = (await Run(exe, ["healthcheck", "--url", $"http://127.0.0.1:{port}"], TimeSpan.FromSeconds(20))).ExitCode;
                }
                Assert.Equal(0, health);
            }
            finally
            {
                server.Kill(entireProcessTree: true);
                await server.WaitForExitAsync();
            }
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }

    private static int FreePort()
    {
        using var l = new TcpListener(IPAddress.Loopback, 0);
        l.Start();
        return ((IPEndPoint)l.LocalEndpoint).Port;
    }

    private static async Task<(int ExitCode, string Output)> Run(string file, string[] args, TimeSpan timeout)
    {
        var psi = new ProcessStartInfo(file, args) { RedirectStandardOutput = true, RedirectStandardError = true };
        using var p = Process.Start(psi)!;
        var stdout = p.StandardOutput.ReadToEndAsync();
        var stderr = p.StandardError.ReadToEndAsync();
        using var cts = new CancellationTokenSource(timeout);
        try { await p.WaitForExitAsync(cts.Token); }
        catch (OperationCanceledException) { p.Kill(entireProcessTree: true); return (-1, $"timed out after {timeout}"); }
        return (p.ExitCode, await stdout + await stderr);
    }

    [GeneratedRegex(@"^FROM\s+(\S+)", RegexOptions.Multiline)]
    private static partial Regex FromLine();

    [GeneratedRegex(@"^RUN\s+(?:.*\\\n)*.*$", RegexOptions.Multiline)]
    private static partial Regex RunLine();

    [GeneratedRegex(@"^USER\s+(.+)$", RegexOptions.Multiline)]
    private static partial Regex UserLine();

    [GeneratedRegex(@"^(ENV|ARG)\s+(?:.*\\\n)*.*$", RegexOptions.Multiline)]
    private static partial Regex EnvOrArg();
}

/// <summary>A test that builds or runs the image: skipped, with the reason, when no container engine answers (decided at discovery).</summary>
public sealed class DockerFactAttribute : FactAttribute
{
    private static readonly string? Reason = Probe();

    public DockerFactAttribute()
    {
        if (Reason is not null) Skip = Reason;
    }

    private static string? Probe()
    {
        try
        {
            using var p = Process.Start(new ProcessStartInfo("docker", ["info", "--format", "{{.ServerVersion}}"])
                { RedirectStandardOutput = true, RedirectStandardError = true })!;
            var err = p.StandardError.ReadToEndAsync();
            p.StandardOutput.ReadToEnd();
            if (!p.WaitForExit(15_000)) { p.Kill(true); return "no container engine: 'docker info' ran over 15 s"; }
            return p.ExitCode == 0 ? null : $"no container engine answers: {err.Result.Trim()}";
        }
        catch (System.ComponentModel.Win32Exception e)
        {
            return $"no container engine: docker is not installed ({e.Message})";
        }
    }
}
