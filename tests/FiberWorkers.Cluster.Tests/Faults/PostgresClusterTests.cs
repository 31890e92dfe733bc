using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Stores;
using FiberWorkers.Cluster.Tests.Support;

namespace FiberWorkers.Cluster.Tests.Faults;

/// <summary>The same sweep with the coordinator's store in PostgreSQL (the cluster store), killed and restarted once.</summary>
public sealed class PostgresClusterTests
{
    [Fact]
    public async Task A_sweep_on_a_postgres_store_survives_a_coordinator_restart_and_matches_the_embedded_atlas()
    {
        var reference = ClusterScenario.ReferenceHash();
        using var database = new PostgresDatabase("clustersweep");
        var environment = new Dictionary<string, string> { ["FIBER_PG"] = database.ConnectionString };
        var first = ServerProcess.Coordinator("postgres:env:FIBER_PG", environment: environment, extra: ["--heartbeat", "0.5"]);
        var port = first.Port;
        using var worker1 = ServerProcess.Worker(first.Address, "pg-1");
        using var worker2 = ServerProcess.Worker(first.Address, "pg-2");
        ServerProcess? second = null;
        try
        {
            using var client = new ClusterClient(first.Address) { ReconnectPatience = TimeSpan.FromSeconds(60) };
            var done = 0;
            var sweep = client.SweepAsync(ClusterScenario.Request(), new Progress<FiberWorkers.Contracts.V1.SweepProgressUpdate>(u => Volatile.Write(ref done, u.TilesDone)));
            await ClusterScenario.WaitUntil(() => Task.FromResult(Volatile.Read(ref done) >= 8), TimeSpan.FromSeconds(90), "eight tiles done");
            first.Kill();
            second = ServerProcess.Coordinator("postgres:env:FIBER_PG", port, environment, "--heartbeat", "0.5");
            var outcome = await sweep.WaitAsync(TimeSpan.FromSeconds(180));
            Assert.Equal(reference, outcome.ContentHash);
            Assert.Equal(0, second.Stop(TimeSpan.FromSeconds(30)));

            using var ledger = LedgerStores.Open($"postgres:{database.ConnectionString}");
            var record = ledger.Sweep(outcome.SweepId);
            Assert.NotNull(record);
            Assert.Equal("committed", record.State);
            Assert.Equal(outcome.Tiles, record.FinishedTiles);
            var merged = ledger.Attempts(outcome.SweepId).Where(a => a.Outcome == "merged").ToList();
            Assert.Equal(merged.Count, merged.Select(a => a.TileKey).Distinct().Count());
            Assert.Equal(reference, ledger.Versions(outcome.AtlasId).Single().ContentHash);
        }
        finally
        {
            first.Dispose();
            second?.Dispose();
        }
    }
}
