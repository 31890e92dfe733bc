using FiberWorkers.Algebra.Families;
using FiberWorkers.Cluster.Stores;
using FiberWorkers.Cluster.Tests.Support;
using Npgsql;

namespace FiberWorkers.Cluster.Tests.Stores;

/// <summary>The PostgreSQL store's own schema: created and versioned on open, kept on reopen, and refused when not ours.</summary>
public sealed class PostgresAtlasStoreTests
{
    [Fact]
    public void Opening_creates_the_schema_at_its_version_and_reopening_keeps_it_and_the_data()
    {
        using var database = new PostgresDatabase("schema");
        using (var store = PostgresAtlasStore.Open(database.ConnectionString))
        {
            store.EnsureAtlas("a1", "h", "{}");
        }

        Assert.Equal("FWK1 1", Scalar(database, "SELECT application || ' ' || version FROM fiberworkers.schema_version"));
        Assert.Equal(1L, Scalar(database, "SELECT COUNT(*) FROM fiberworkers.schema_version"));
        using (var store = PostgresAtlasStore.Open(database.ConnectionString))
        {
            Assert.Equal(["a1"], store.Atlases());
        }

        Assert.Equal(1L, Scalar(database, "SELECT COUNT(*) FROM fiberworkers.schema_version"));
        Assert.Equal(10L, Scalar(database, "SELECT COUNT(*) FROM information_schema.tables WHERE table_schema = 'fiberworkers'"));
    }

    [Fact]
    public void A_database_of_a_newer_schema_is_refused_with_both_versions_named()
    {
        using var database = new PostgresDatabase("newer");
        using (PostgresAtlasStore.Open(database.ConnectionString))
        {
        }

        Execute(database, $"UPDATE fiberworkers.schema_version SET version = {PostgresAtlasStore.SchemaVersion + 1}");

        var error = Assert.Throws<InputException>(() => PostgresAtlasStore.Open(database.ConnectionString));
        Assert.Contains($"store schema version {PostgresAtlasStore.SchemaVersion + 1} is newer than this build reads ({PostgresAtlasStore.SchemaVersion})", error.Message, StringComparison.Ordinal);
        Assert.StartsWith("postgres 127.0.0.1:", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_schema_of_another_application_is_refused_and_left_as_it_was()
    {
        using var database = new PostgresDatabase("foreign");
        Execute(database, "CREATE SCHEMA fiberworkers; CREATE TABLE fiberworkers.readings (t double precision); INSERT INTO fiberworkers.readings VALUES (1.5)");

        var error = Assert.Throws<InputException>(() => PostgresAtlasStore.Open(database.ConnectionString));

        Assert.Contains("schema fiberworkers: holds tables of another application (readings)", error.Message, StringComparison.Ordinal);
        Assert.Equal(1L, Scalar(database, "SELECT COUNT(*) FROM information_schema.tables WHERE table_schema = 'fiberworkers'"));
        Assert.Equal(1.5, Scalar(database, "SELECT t FROM fiberworkers.readings"));
    }

    private static object? Scalar(PostgresDatabase database, string sql)
    {
        using var connection = new NpgsqlConnection(database.ConnectionString);
        connection.Open();
        using var command = new NpgsqlCommand(sql, connection);
        return command.ExecuteScalar();
    }

    private static void Execute(PostgresDatabase database, string sql)
    {
        using var connection = new NpgsqlConnection(database.ConnectionString);
        connection.Open();
        using var command = new NpgsqlCommand(sql, connection);
        command.ExecuteNonQuery();
    }
}
