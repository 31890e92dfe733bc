using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Tests.Support;

namespace FiberWorkers.Cluster.Tests.Faults;

public sealed class MisbehavingWorkerTests
{
    [Fact]
    public async Task Tiles_of_a_worker_that_answers_garbage_or_hangs_are_retried_elsewhere_and_its_circuit_opens()
    {
        var reference = ClusterScenario.ReferenceHash();
        using var directory = new TempDirectory();
        var db = directory.File("cluster.db");
        using var coordinator = ServerProcess.Coordinator($"sqlite:{db}", extra: ["--heartbeat", "0.5", "--tile-deadline", "5"]);
        using var good = ServerProcess.Worker(coordinator.Address, "good");
        using var garbage = ServerProcess.Worker(coordinator.Address, "garbage", fault: "garbage");
        using var hang = ServerProcess.Worker(coordinator.Address, "hang", fault: "hang");
        using var client = new ClusterClient(coordinator.Address);
        await ClusterScenario.WaitUntil(async () => (await ClusterScenario.Workers(client)).Count == 3, TimeSpan.FromSeconds(30), "three workers to register");

        var outcome = await client.SweepAsync(ClusterScenario.Request()).WaitAsync(TimeSpan.FromSeconds(240));
        Assert.Equal(reference, outcome.ContentHash);
        Assert.NotEmpty(coordinator.EventsWith("circuit of worker {WorkerId} opened"));
        Assert.Contains(coordinator.EventsWith("circuit of worker {WorkerId} opened"), e => e.GetProperty("WorkerId").GetString() == "garbage");
        Assert.Equal(0, coordinator.Stop(TimeSpan.FromSeconds(30)));

        using var ledger = SqliteAtlasStore.Open(db);
        var attempts = ledger.Attempts(outcome.SweepId);
        var story = string.Join("\n", attempts.Select(a => $"{a.TileKey} #{a.Attempt} {a.Worker} {a.Outcome} {a.Seconds:F2}s {a.Detail}"));
        Assert.True(attempts.Any(a => a.Worker == "hang" && a.Outcome == "timeout"), story);
        Assert.Contains(attempts, a => a.Worker == "garbage" && a.Outcome == "failed" && a.Detail.Contains("answered tile", StringComparison.Ordinal));
        Assert.Contains(attempts, a => a.Worker == "hang" && a.Outcome == "timeout");
        var merged = attempts.Where(a => a.Outcome == "merged").ToList();
        Assert.Equal(outcome.Tiles, merged.Count);
        Assert.All(merged, a => Assert.Equal("good", a.Worker));
    }
}
