using System.Diagnostics;
using System.Globalization;
using System.Net;
using System.Net.Sockets;
using Npgsql;

namespace FiberWorkers.Cluster.Tests.Support;

/// <summary>
/// The PostgreSQL server of this test run: the one <c>FIBER_TEST_POSTGRES</c> names (a connection string of a user who
/// may create databases), or else a throwaway server started from <c>/usr/lib/postgresql/*/bin</c> on a free loopback
/// port with its data and socket in a temporary directory, stopped and deleted when the test process exits. Neither
/// available: every test that asks for it fails, saying how to provide one.
/// </summary>
internal sealed class PostgresServer
{
    /// <summary>The variable that names an existing server.</summary>
    public const string Variable = "FIBER_TEST_POSTGRES";

    private const string FolderPrefix = "fiberworkers-pg-";

    private static readonly Lazy<PostgresServer> Instance = new(Start, LazyThreadSafetyMode.ExecutionAndPublication);

    private PostgresServer(string connectionString, string description)
    {
        ConnectionString = connectionString;
        Description = description;
    }

    /// <summary>The server, started on first use (a failure to provide one is remembered and thrown to every caller).</summary>
    public static PostgresServer Shared => Instance.Value;

    /// <summary>A connection string to the server's maintenance database.</summary>
    public string ConnectionString { get; }

    /// <summary>Where the server came from, for messages (no password).</summary>
    public string Description { get; }

    /// <summary>Creates a database of its own for a test; returns its name and a connection string to it.</summary>
    public (string Name, string ConnectionString) CreateDatabase(string label)
    {
        var clean = new string([.. label.ToLowerInvariant().Where(char.IsAsciiLetterOrDigit).Take(20)]);
        var name = $"fw_{clean}_{Guid.NewGuid():N}";
        using (var connection = new NpgsqlConnection(ConnectionString))
        {
            connection.Open();
            using var command = new NpgsqlCommand($"CREATE DATABASE \"{name}\"", connection);
            try
            {
                command.ExecuteNonQuery();
            }
            catch (PostgresException e)
            {
                throw new InvalidOperationException($"cannot create a test database on {Description}: {e.MessageText} (the user needs CREATEDB)", e);
            }
        }

        return (name, new NpgsqlConnectionStringBuilder(ConnectionString) { Database = name }.ConnectionString);
    }

    /// <summary>Drops a test database, closing whatever connections are left on it.</summary>
    public void DropDatabase(string name)
    {
        using var connection = new NpgsqlConnection(ConnectionString);
        connection.Open();
        using var command = new NpgsqlCommand($"DROP DATABASE IF EXISTS \"{name}\" WITH (FORCE)", connection);
        command.ExecuteNonQuery();
    }

    private static PostgresServer Start()
    {
        var configured = Environment.GetEnvironmentVariable(Variable);
        if (!string.IsNullOrWhiteSpace(configured))
        {
            var builder = new NpgsqlConnectionStringBuilder(configured);
            builder.Database ??= "postgres";
            var description = $"the server {Variable} names ({builder.Host}:{builder.Port}, user {builder.Username})";
            Probe(builder.ConnectionString, description);
            return new PostgresServer(builder.ConnectionString, description);
        }

        var bin = Directory.Exists("/usr/lib/postgresql")
            ? Directory.GetDirectories("/usr/lib/postgresql")
                .Select(d => (Folder: d, Major: int.TryParse(Path.GetFileName(d), NumberStyles.None, CultureInfo.InvariantCulture, out var major) ? major : -1))
                .Where(d => d.Major > 0 && File.Exists(Path.Combine(d.Folder, "bin", "initdb")))
                .OrderByDescending(d => d.Major)
                .Select(d => Path.Combine(d.Folder, "bin"))
                .FirstOrDefault()
            : null;
        if (bin is null)
        {
            throw new InvalidOperationException(
                $"These tests need PostgreSQL. Either set {Variable} to the connection string of a server where the user may create databases " +
                "(e.g. Host=127.0.0.1;Port=5432;Username=postgres;Password=...), or install the server (apt-get install postgresql) so that the tests " +
                "start a throwaway one from /usr/lib/postgresql/*/bin. Neither was found.");
        }

        return Throwaway.Start(bin);
    }

    private static void Probe(string connectionString, string description)
    {
        try
        {
            using var connection = new NpgsqlConnection(connectionString);
            connection.Open();
        }
        catch (NpgsqlException e)
        {
            throw new InvalidOperationException($"{description} does not answer: {(e is PostgresException p ? p.MessageText : e.Message)}", e);
        }
    }

    /// <summary>A server of our own: initdb into a temporary directory, pg_ctl start on a free port, stop and delete at exit.</summary>
    private static class Throwaway
    {
        public static PostgresServer Start(string bin)
        {
            RemoveOrphans(bin);
            var folder = Directory.CreateTempSubdirectory(FolderPrefix).FullName;
            var data = Path.Combine(folder, "data");
            var socket = Path.Combine(folder, "socket");
            Directory.CreateDirectory(socket);
            File.WriteAllText(Path.Combine(folder, "owner.pid"), Environment.ProcessId.ToString(CultureInfo.InvariantCulture));

            // initdb refuses to run as root: the server then runs as the postgres user, which must own its folders.
            if (Environment.IsPrivilegedProcess)
            {
                Run("chown", ["-R", "postgres", folder]);
            }

            AsServerUser(Path.Combine(bin, "initdb"), ["-D", data, "-U", "postgres", "-E", "UTF8", "--auth-local=trust", "--auth-host=trust", "--no-sync"]);

            // A free port can be taken between probing and binding: try a few.
            for (var attempt = 1; ; attempt++)
            {
                var port = FreePort();
                try
                {
                    // Durability is not under test here (crash safety is the stores' transactions): fsync off makes
                    // CREATE DATABASE per test class cheap.
                    AsServerUser(
                        Path.Combine(bin, "pg_ctl"),
                        ["-D", data, "-l", Path.Combine(folder, "server.log"), "-w", "-t", "60", "-o",
                            $"-c listen_addresses=127.0.0.1 -p {port} -k {socket} -c fsync=off -c synchronous_commit=off -c full_page_writes=off", "start"]);
                }
                catch (InvalidOperationException) when (attempt < 3)
                {
                    continue;
                }

                AppDomain.CurrentDomain.ProcessExit += (_, _) => Stop(bin, folder);
                var connection = $"Host=127.0.0.1;Port={port};Username=postgres;Database=postgres";
                var description = $"the throwaway server at 127.0.0.1:{port} (data in {folder})";
                Probe(connection, description);
                return new PostgresServer(connection, description);
            }
        }

        /// <summary>Servers left by test processes that were killed before they could stop them.</summary>
        private static void RemoveOrphans(string bin)
        {
            foreach (var folder in Directory.GetDirectories(Path.GetTempPath(), FolderPrefix + "*"))
            {
                var owner = Path.Combine(folder, "owner.pid");
                if (!File.Exists(owner) || !int.TryParse(File.ReadAllText(owner), NumberStyles.None, CultureInfo.InvariantCulture, out var pid) || Alive(pid))
                {
                    continue;
                }

                Stop(bin, folder);
            }
        }

        private static bool Alive(int pid)
        {
            try
            {
                using var process = Process.GetProcessById(pid);
                return !process.HasExited;
            }
            catch (ArgumentException)
            {
                return false;
            }
        }

        /// <summary>
        /// Stops the server (if it runs) and deletes its folder, from a shell of its own: the test host may be ended
        /// before its exit handlers finish, and the shell carries on without it.
        /// </summary>
        private static void Stop(string bin, string folder)
        {
            var stop = Command(Path.Combine(bin, "pg_ctl"), ["-D", Path.Combine(folder, "data"), "-m", "immediate", "-w", "stop"]);
            var script = $"if [ -f '{folder}/data/postmaster.pid' ]; then {stop} >/dev/null 2>&1; fi; rm -rf '{folder}'";
            var start = new ProcessStartInfo("sh") { UseShellExecute = false, RedirectStandardOutput = false, RedirectStandardError = false };
            start.ArgumentList.Add("-c");
            start.ArgumentList.Add(script);
            using var process = Process.Start(start);
            process?.WaitForExit(TimeSpan.FromSeconds(30));
        }

        private static int FreePort()
        {
            using var listener = new TcpListener(IPAddress.Loopback, 0);
            listener.Start();
            return ((IPEndPoint)listener.LocalEndpoint).Port;
        }

        private static void AsServerUser(string program, string[] arguments)
        {
            if (Environment.IsPrivilegedProcess)
            {
                Run("su", ["postgres", "-c", Quoted(program, arguments)]);
            }
            else
            {
                Run(program, arguments);
            }
        }

        /// <summary>A shell command line running the program as the server's user (su when root).</summary>
        private static string Command(string program, string[] arguments) =>
            Environment.IsPrivilegedProcess ? $"su postgres -c \"{Quoted(program, arguments)}\"" : Quoted(program, arguments);

        /// <summary>Every word single-quoted (none of ours holds a quote).</summary>
        private static string Quoted(string program, string[] arguments) => string.Join(' ', new[] { program }.Concat(arguments).Select(a => $"'{a}'"));

        private static void Run(string program, string[] arguments)
        {
            var start = new ProcessStartInfo(program) { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false };
            foreach (var argument in arguments)
            {
                start.ArgumentList.Add(argument);
            }

            using var process = Process.Start(start) ?? throw new InvalidOperationException($"cannot start {program}");
            var output = process.StandardOutput.ReadToEndAsync();
            var error = process.StandardError.ReadToEndAsync();
            if (!process.WaitForExit(TimeSpan.FromMinutes(2)))
            {
                process.Kill(entireProcessTree: true);
                throw new InvalidOperationException($"{program} {string.Join(' ', arguments)} did not finish within 2 minutes");
            }

            if (process.ExitCode != 0)
            {
                throw new InvalidOperationException($"{program} {string.Join(' ', arguments)} failed (exit {process.ExitCode}): {error.Result}{output.Result}");
            }
        }
    }
}
