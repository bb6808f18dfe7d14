using System.Diagnostics;
using System.Net;
using System.Net.Sockets;
using System.Text.RegularExpressions;

namespace Strayspot.Tests.Docker;

/// <summary>
/// No container engine runs here, so the container is checked in the two ways that can be: the Dockerfile statically,
/// and its publish step (the same script) run for real, with the published executable smoke-tested on the demo.
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
        Assert.Contains("chiseled", froms[^1]);
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

    [GeneratedRegex(@"^USER\s+(.+)$", RegexOptions.Multiline)]
    private static partial Regex UserLine();

    [GeneratedRegex(@"^(ENV|ARG)\s+(?:.*\\\n)*.*$", RegexOptions.Multiline)]
    private static partial Regex EnvOrArg();
}
