using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Stores;
using FiberWorkers.Cluster.Tests.Support;
using Npgsql;

namespace FiberWorkers.Cluster.Tests.Stores;

/// <summary>The ledger contract on PostgreSQL: a fresh database per test (see <see cref="PostgresServer"/>).</summary>
public sealed class PostgresLedgerContractTests : LedgerContractTests
{
    private readonly PostgresDatabase _database = new("contract");

    protected override string Container => "database";

    protected override ISweepLedger Open() => PostgresAtlasStore.Open(_database.ConnectionString);

    protected override void CorruptPayload(string tileHash)
    {
        using var connection = new NpgsqlConnection(_database.ConnectionString);
        connection.Open();
        using var command = new NpgsqlCommand(
            "UPDATE fiberworkers.tiles SET payload = set_byte(payload, 2, get_byte(payload, 2) # 255) WHERE tile_hash = @h", connection);
        command.Parameters.AddWithValue("h", tileHash);
        Assert.Equal(1, command.ExecuteNonQuery());
    }

    public override void Dispose() => _database.Dispose();
}
