namespace FiberWorkers.Cluster.Tests.Support;

/// <summary>
/// A fresh database on the test run's PostgreSQL server, dropped on dispose: as a class fixture
/// (<c>IClassFixture&lt;PostgresDatabase&gt;</c>) one per test class, or created per test.
/// </summary>
public sealed class PostgresDatabase : IDisposable
{
    /// <summary>A database for a test class.</summary>
    public PostgresDatabase()
        : this("fixture")
    {
    }

    /// <summary>A database whose name starts with the label (letters and digits kept).</summary>
    public PostgresDatabase(string label)
    {
        (Name, ConnectionString) = PostgresServer.Shared.CreateDatabase(label);
    }

    /// <summary>The database's name.</summary>
    public string Name { get; }

    /// <summary>A connection string to it (no password on the throwaway server).</summary>
    public string ConnectionString { get; }

    /// <inheritdoc />
    public void Dispose() => PostgresServer.Shared.DropDatabase(Name);
}
