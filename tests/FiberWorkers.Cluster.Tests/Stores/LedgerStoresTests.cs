using System.Net;
using System.Net.Sockets;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Stores;
using FiberWorkers.Cluster.Tests.Support;
using Npgsql;

namespace FiberWorkers.Cluster.Tests.Stores;

/// <summary>Store specs: the three accepted forms open their store; anything else says what is accepted, and no error repeats a password.</summary>
public sealed class LedgerStoresTests
{
    private const string Password = "s3cret-hunter2";

    [Fact]
    public void A_sqlite_spec_opens_the_atlas_file_creating_it()
    {
        var folder = Directory.CreateTempSubdirectory("fiberworkers-spec-");
        try
        {
            var path = Path.Combine(folder.FullName, "ledger.db");
            using (var store = LedgerStores.Open($"sqlite:{path}"))
            {
                Assert.IsType<SqliteAtlasStore>(store);
                store.EnsureAtlas("a1", "h", "{}");
            }

            using var reopened = LedgerStores.Open($"SQLite:{path}");
            Assert.Equal(["a1"], reopened.Atlases());
        }
        finally
        {
            folder.Delete(recursive: true);
        }
    }

    [Fact]
    public void A_postgres_spec_opens_the_database_given_inline_or_through_an_environment_variable()
    {
        using var database = new PostgresDatabase("spec");
        var variable = $"FIBER_SPEC_TEST_{Guid.NewGuid():N}";
        Environment.SetEnvironmentVariable(variable, database.ConnectionString);
        try
        {
            using (var inline = LedgerStores.Open($"postgres:{database.ConnectionString}"))
            {
                Assert.IsType<PostgresAtlasStore>(inline);
                inline.EnsureAtlas("a1", "h", "{}");
            }

            using var fromVariable = LedgerStores.Open($"postgres:env:{variable}");
            Assert.IsType<PostgresAtlasStore>(fromVariable);
            Assert.Equal(["a1"], fromVariable.Atlases());
        }
        finally
        {
            Environment.SetEnvironmentVariable(variable, null);
        }
    }

    [Theory]
    [InlineData("", "store: '': has no kind; expected sqlite:PATH, postgres:CONNECTION-STRING or postgres:env:VARIABLE")]
    [InlineData("atlas.db", "store: 'atlas.db': has no kind; expected sqlite:PATH, postgres:CONNECTION-STRING or postgres:env:VARIABLE")]
    [InlineData("mysql:localhost", "store: 'mysql:localhost': unknown kind 'mysql'; expected sqlite:PATH, postgres:CONNECTION-STRING or postgres:env:VARIABLE")]
    [InlineData("sqlite:", "store: 'sqlite:': names no file (sqlite:PATH)")]
    [InlineData("postgres:", "store: 'postgres:': holds no connection string (postgres:Host=…;Port=…;Username=…)")]
    [InlineData("postgres:env:", "store: 'postgres:env:': names no environment variable (postgres:env:VARIABLE, letters, digits and '_')")]
    [InlineData("postgres:env:1ST", "store: 'postgres:env:1ST': names no environment variable")]
    [InlineData("postgres:env:A-B", "store: 'postgres:env:A-B': names no environment variable")]
    [InlineData("postgress:Host=x;Password=" + Password, "store: (not shown: it may hold a password): unknown kind 'postgress'")]
    public void A_malformed_spec_says_which_forms_are_accepted(string spec, string expected)
    {
        var error = Assert.Throws<InputException>(() => LedgerStores.Open(spec));

        Assert.StartsWith(expected, error.Message, StringComparison.Ordinal);
        Assert.DoesNotContain(Password, error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void An_unset_variable_is_named_in_the_error()
    {
        var variable = $"FIBER_SPEC_UNSET_{Guid.NewGuid():N}";

        var error = Assert.Throws<InputException>(() => LedgerStores.Open($"postgres:env:{variable}"));

        Assert.Equal($"store: postgres:env:{variable}: the environment variable {variable} is not set or empty; it should hold the connection string (Host=…;Port=…;Username=…)", error.Message);
    }

    [Fact]
    public void A_connection_string_that_is_not_one_is_refused_without_repeating_it()
    {
        var error = Assert.Throws<InputException>(() => LedgerStores.Open($"postgres:Host=127.0.0.1;Colour=blue;Password={Password}"));

        Assert.StartsWith("postgres: connection string: not of the form Key=Value;… as Npgsql reads it", error.Message, StringComparison.Ordinal);
        Assert.Contains("colour", error.Message, StringComparison.OrdinalIgnoreCase);
        Assert.DoesNotContain(Password, error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void An_unreachable_server_is_named_by_host_and_port_without_password_or_stack_trace()
    {
        // A port that was free a moment ago: nothing listens there.
        int port;
        using (var listener = new TcpListener(IPAddress.Loopback, 0))
        {
            listener.Start();
            port = ((IPEndPoint)listener.LocalEndpoint).Port;
        }

        var error = Assert.Throws<InputException>(() => LedgerStores.Open($"postgres:Host=127.0.0.1;Port={port};Username=fiber;Password={Password};Database=atlas;Timeout=5"));

        Assert.StartsWith($"postgres 127.0.0.1:{port}/atlas: cannot reach the server at 127.0.0.1:{port} (ConnectionRefused", error.Message, StringComparison.Ordinal);
        Assert.Contains("check the host, the port and that PostgreSQL runs", error.Message, StringComparison.Ordinal);
        Assert.DoesNotContain(Password, error.Message, StringComparison.Ordinal);
        Assert.DoesNotContain("   at ", error.Message, StringComparison.Ordinal);
        Assert.DoesNotContain(Environment.NewLine, error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_server_that_refuses_says_why()
    {
        var builder = new NpgsqlConnectionStringBuilder(PostgresServer.Shared.ConnectionString) { Database = "fw_no_such_database", Password = Password };

        var error = Assert.Throws<InputException>(() => LedgerStores.Open($"postgres:{builder.ConnectionString}"));

        Assert.Contains($"/fw_no_such_database: the server at {builder.Host}:{builder.Port} refused: database \"fw_no_such_database\" does not exist (SQLSTATE 3D000)", error.Message, StringComparison.Ordinal);
        Assert.DoesNotContain(Password, error.Message, StringComparison.Ordinal);
    }
}
