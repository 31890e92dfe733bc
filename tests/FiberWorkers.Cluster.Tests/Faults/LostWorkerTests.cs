using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Tests.Support;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Cluster.Tests.Faults;

/// <summary>Real processes on loopback: workers die, the coordinator dies, and the atlas comes out the same.</summary>
public sealed class LostWorkerTests
{
    [Fact]
    public async Task A_worker_killed_mid_tile_costs_only_its_tile_and_the_atlas_is_the_fault_free_one()
    {
        var reference = ClusterScenario.ReferenceHash();
        using var directory = new TempDirectory();
        var db = directory.File("cluster.db");
        SweepOutcome outcome;
        using (var coordinator = ServerProcess.Coordinator($"sqlite:{db}", extra: ["--heartbeat", "0.5"]))
        {
            // The steady workers wait 250 ms before each tile, so that tiles are still left when the replacement has
            // started and registered (on a fast host the 36 tiles otherwise finished before it joined).
            using var steady1 = ServerProcess.Worker(coordinator.Address, "steady-1", fault: "slow:250");
            using var steady2 = ServerProcess.Worker(coordinator.Address, "steady-2", fault: "slow:250");
            using var victim = ServerProcess.Worker(coordinator.Address, "victim");
            using var client = new ClusterClient(coordinator.Address);
            await ClusterScenario.WaitUntil(async () => (await ClusterScenario.Workers(client)).Count == 3, TimeSpan.FromSeconds(30), "three workers to register");

            var sweep = client.SweepAsync(ClusterScenario.Request());
            await ClusterScenario.WaitUntil(
                async () => (await ClusterScenario.Workers(client)).Any(w => w.WorkerId == "victim" && w.TilesInFlight > 0 && w.TilesDone > 0),
                TimeSpan.FromSeconds(60),
                "the victim to be computing a tile after finishing one");
            victim.Kill();

            // A replacement joins while the sweep runs and takes tiles.
            using var replacement = ServerProcess.Worker(coordinator.Address, "replacement");
            outcome = await sweep.WaitAsync(TimeSpan.FromSeconds(180));
            Assert.Equal(0, coordinator.Stop(TimeSpan.FromSeconds(30)));
        }

        Assert.Equal(reference, outcome.ContentHash);
        Assert.Equal(36, outcome.Tiles);
        using var ledger = SqliteAtlasStore.Open(db);
        var attempts = ledger.Attempts(outcome.SweepId);
        Assert.Contains(attempts, a => a.Worker == "victim" && a.Outcome is "failed" or "lost");
        var merged = attempts.Where(a => a.Outcome == "merged").ToList();
        Assert.Equal(outcome.Tiles, merged.Count);
        Assert.Equal(merged.Count, merged.Select(a => a.TileKey).Distinct().Count());
        Assert.Contains(merged, a => a.Worker == "replacement");
        Assert.DoesNotContain(attempts, a => a.Outcome == "duplicate");
    }

    [Fact]
    public async Task A_coordinator_killed_mid_sweep_and_restarted_on_its_store_resumes_and_merges_no_tile_twice()
    {
        var reference = ClusterScenario.ReferenceHash();
        using var directory = new TempDirectory();
        var db = directory.File("cluster.db");
        var first = ServerProcess.Coordinator($"sqlite:{db}", extra: ["--heartbeat", "0.5"]);
        var port = first.Port;
        using var worker1 = ServerProcess.Worker(first.Address, "w1");
        using var worker2 = ServerProcess.Worker(first.Address, "w2");
        SweepOutcome outcome;
        ServerProcess? second = null;
        try
        {
            using var client = new ClusterClient(first.Address) { ReconnectPatience = TimeSpan.FromSeconds(60) };
            var done = 0;
            var sweep = client.SweepAsync(ClusterScenario.Request(), new Progress<SweepProgressUpdate>(u => Volatile.Write(ref done, u.TilesDone)));
            await ClusterScenario.WaitUntil(() => Task.FromResult(Volatile.Read(ref done) >= 10), TimeSpan.FromSeconds(90), "ten tiles done");
            first.Kill();

            second = ServerProcess.Coordinator($"sqlite:{db}", port, extra: ["--heartbeat", "0.5"]);
            outcome = await sweep.WaitAsync(TimeSpan.FromSeconds(180));
            Assert.NotEmpty(second.EventsWith("resumed after a restart"));
            Assert.Equal(0, second.Stop(TimeSpan.FromSeconds(30)));
        }
        finally
        {
            first.Dispose();
            second?.Dispose();
        }

        Assert.Equal(reference, outcome.ContentHash);
        using var ledger = SqliteAtlasStore.Open(db);
        var record = ledger.Sweep(outcome.SweepId);
        Assert.NotNull(record);
        Assert.Equal("committed", record.State);
        Assert.Equal(outcome.Tiles, record.FinishedTiles);
        var merged = ledger.Attempts(outcome.SweepId).Where(a => a.Outcome == "merged").ToList();
        Assert.Equal(merged.Count, merged.Select(a => a.TileKey).Distinct().Count());
        Assert.Single(ledger.Versions(outcome.AtlasId));
    }
}
