using FiberWorkers.Atlas.Stores;
using Microsoft.Data.Sqlite;

namespace FiberWorkers.Cluster.Tests.Stores;

/// <summary>The ledger contract on the embedded store: a fresh atlas file per test.</summary>
public sealed class SqliteLedgerContractTests : LedgerContractTests
{
    private readonly DirectoryInfo _folder = Directory.CreateTempSubdirectory("fiberworkers-ledger-");

    private string Path => System.IO.Path.Combine(_folder.FullName, "ledger.db");

    protected override string Container => "atlas file";

    protected override ISweepLedger Open() => SqliteAtlasStore.Open(Path);

    protected override void CorruptPayload(string tileHash)
    {
        using var connection = new SqliteConnection(new SqliteConnectionStringBuilder { DataSource = Path, Pooling = false }.ToString());
        connection.Open();
        using var command = connection.CreateCommand();
        command.CommandText = "UPDATE tiles SET payload = CAST(substr(payload, 1, 2) || x'ff' || substr(payload, 4) AS BLOB) WHERE tile_hash = $h";
        command.Parameters.AddWithValue("$h", tileHash);
        Assert.Equal(1, command.ExecuteNonQuery());
    }

    public override void Dispose() => _folder.Delete(recursive: true);
}
