using System.Diagnostics;
using System.Net;
using System.Net.Sockets;
using Npgsql;

namespace Strayspot.Tests.Support;

/// <summary>
/// A throwaway PostgreSQL cluster for one test run: <c>initdb</c> as the <c>postgres</c> user into a temporary
/// folder, <c>pg_ctl</c> with that folder as its socket directory and a free loopback port, stopped and removed at
/// the end. Never a system cluster, never a mock. Needs Debian's <c>postgresql</c> package and root (to become
/// the <c>postgres</c> user, as <c>initdb</c> refuses root).
/// </summary>
public sealed class PostgresCluster : IDisposable
{
    private static readonly Lazy<(string? Bin, string? SkipReason)> Setup = new(Find);

    private readonly string _folder;
    private readonly string _data;
    private int _databases;

    /// <summary>Null when a cluster can be started here, otherwise what is missing.</summary>
    public static string? SkipReason => Setup.Value.SkipReason;

    private static string Bin => Setup.Value.Bin ?? throw new InvalidOperationException(SkipReason);

    public PostgresCluster()
    {
        if (SkipReason is { } why) throw new InvalidOperationException(why);
        // Under /tmp with a path the postgres user can walk (temp folders made by .NET are root-only).
        _folder = Path.Combine(Path.GetTempPath(), "strayspot-pg-" + Guid.NewGuid().ToString("N")[..12]);
        _data = Path.Combine(_folder, "data");
        Directory.CreateDirectory(_data);
        Run("chown", "-R", "postgres:postgres", _folder);
        Run("chmod", "700", _folder, _data);
        AsPostgres(Path.Combine(Bin, "initdb"), "-D", _data, "-A", "trust", "-U", "postgres", "-E", "UTF8", "--no-sync", "--no-instructions");
        Port = FreePort();
        Start();
    }

    public int Port { get; }

    /// <summary>Connection string for a database of this cluster (the maintenance database when none is given).</summary>
    public string ConnectionString(string database = "postgres") => new NpgsqlConnectionStringBuilder
    {
        Host = "127.0.0.1", Port = Port, Username = "postgres", Database = database, Timeout = 5, Pooling = true,
    }.ToString();

    /// <summary>A fresh, empty database: each test gets its own.</summary>
    public string CreateDatabase()
    {
        string name = $"t{Interlocked.Increment(ref _databases)}_{Guid.NewGuid():N}"[..20];
        using var c = new NpgsqlConnection(ConnectionString());
        c.Open();
        using var cmd = new NpgsqlCommand($"CREATE DATABASE \"{name}\"", c);
        cmd.ExecuteNonQuery();
        return ConnectionString(name);
    }

    /// <summary>
    /// Starts the server. Durability is not what these tests check (the server is stopped cleanly, never killed),
    /// so fsync is off to keep them fast.
    /// </summary>
    public void Start() => AsPostgres(Path.Combine(Bin, "pg_ctl"), "-D", _data, "-l", Path.Combine(_data, "server.log"), "-w", "-t", "30",
        "-o", $"-p {Port} -k {_folder} -c listen_addresses=127.0.0.1 -c fsync=off -c max_connections=200", "start");

    /// <summary>A fast shutdown: sessions are ended, as when the database server is restarted under its clients.</summary>
    public void Stop()
    {
        AsPostgres(Path.Combine(Bin, "pg_ctl"), "-D", _data, "-m", "fast", "-w", "stop");
        NpgsqlConnection.ClearAllPools(); // this process's pooled sessions died with the server
    }

    public string ServerLog => File.Exists(Path.Combine(_data, "server.log")) ? File.ReadAllText(Path.Combine(_data, "server.log")) : "";

    public void Dispose()
    {
        NpgsqlConnection.ClearAllPools();
        try { AsPostgres(Path.Combine(Bin, "pg_ctl"), "-D", _data, "-m", "immediate", "-w", "stop"); }
        catch (InvalidOperationException) { } // already stopped
        try { Directory.Delete(_folder, recursive: true); } catch (IOException) { } catch (UnauthorizedAccessException) { }
    }

    private static (string?, string?) Find()
    {
        const string root = "/usr/lib/postgresql";
        string? bin = Directory.Exists(root)
            ? Directory.EnumerateDirectories(root).Select(d => Path.Combine(d, "bin"))
                .Where(b => File.Exists(Path.Combine(b, "initdb")) && File.Exists(Path.Combine(b, "pg_ctl")))
                .OrderByDescending(b => b, StringComparer.Ordinal).FirstOrDefault()
            : null;
        if (bin is null)
            return (null, "PostgreSQL server binaries not found under /usr/lib/postgresql/*/bin; install Debian's postgresql package " +
                          "(apt-get install postgresql; .ci/run does it) to run the PostgreSQL store tests");
        if (!OperatingSystem.IsLinux() || Environment.UserName != "root" || !File.Exists("/usr/sbin/runuser"))
            return (null, "the PostgreSQL store tests start a cluster as the postgres user, which needs root and runuser");
        return (bin, null);
    }

    private static void AsPostgres(string exe, params string[] args) => Run("/usr/sbin/runuser", ["-u", "postgres", "--", exe, .. args]);

    private static void Run(string exe, params string[] args)
    {
        var info = new ProcessStartInfo(exe) { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false };
        foreach (string a in args) info.ArgumentList.Add(a);
        using var p = Process.Start(info)!;
        var stdout = p.StandardOutput.ReadToEndAsync();
        string stderr = p.StandardError.ReadToEnd();
        p.WaitForExit();
        if (p.ExitCode != 0)
            throw new InvalidOperationException($"{exe} {string.Join(' ', args)} exited {p.ExitCode}: {stderr}{stdout.Result}");
    }

    private static int FreePort()
    {
        using var l = new TcpListener(IPAddress.Loopback, 0);
        l.Start();
        return ((IPEndPoint)l.LocalEndpoint).Port;
    }
}

