using System.Diagnostics;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Tests.Support;
using FiberWorkers.Contracts.V1;
using Xunit.Abstractions;

namespace FiberWorkers.Cluster.Tests.Faults;

/// <summary>
/// Real processes on loopback stopped with SIGTERM mid-sweep: a worker finishes or hands back its tile in flight, the
/// coordinator merges what comes back and pauses; no tile is lost or merged twice, and the atlas is the fault-free one.
/// </summary>
public sealed class GracefulShutdownTests(ITestOutputHelper output)
{
    /// <summary>Time a stopped process may take beyond its drain timeout (start-up of the runtime's exit, logs, a loaded 2-core machine).</summary>
    private static readonly TimeSpan ExitMargin = TimeSpan.FromSeconds(6);

    /// <summary>Every level-0 tile key of the scenario's 6×6 grid.</summary>
    private static readonly string[] Grid = [.. Enumerable.Range(0, 6).SelectMany(i => Enumerable.Range(0, 6).Select(j => $"L0:{i},{j}")).Order(StringComparer.Ordinal)];

    [Fact]
    public async Task SIGTERM_of_a_worker_mid_tile_whose_drain_runs_out_hands_the_tile_back_and_loses_no_tile_and_duplicates_none()
    {
        // The victim waits 30 s before each tile and drains for 2 s: its tile in flight cannot finish and must come back.
        var drain = TimeSpan.FromSeconds(2);
        var (outcome, attempts, merged, victimStop) = await SweepWithVictimStopped("slow:30000", drain);

        Assert.Equal(ClusterScenario.ReferenceHash(), outcome.ContentHash);
        Assert.Equal(Grid, merged);
        foreach (var attempt in attempts.Where(a => a.Worker == "victim"))
        {
            output.WriteLine($"victim attempt: {attempt.TileKey} #{attempt.Attempt} {attempt.Outcome} started {(attempt.Started - victimStop.Signal).TotalSeconds:F2} s after the signal, {attempt.Seconds:F2} s: {attempt.Detail}");
        }

        var returned = attempts.Where(a => a.Worker == "victim" && a.Outcome == "returned").ToList();
        Assert.NotEmpty(returned);
        foreach (var attempt in returned)
        {
            Assert.Contains(attempts, a => a.TileKey == attempt.TileKey && a.Outcome == "merged" && a.Worker == "steady");
            Assert.Contains("is stopping: tile", attempt.Detail, StringComparison.Ordinal);
        }

        // The tile running at the signal was held until the hand-back point (3/4 of the drain, 1.5 s), then answered
        // as handed back before the victim exited (not cut off with the connection). A tile waiting behind it for the
        // thread (the one-tile lookahead) went back at once, not started.
        var held = Assert.Single(returned, a => a.Started < victimStop.Signal && a.Detail.Contains("handed back unfinished", StringComparison.Ordinal));
        var answered = held.Started + TimeSpan.FromSeconds(held.Seconds);
        Assert.InRange(answered, victimStop.Signal + TimeSpan.FromSeconds(1), victimStop.Signal + victimStop.Elapsed);
        foreach (var queued in returned.Where(a => a.Started < victimStop.Signal && a != held))
        {
            Assert.Contains("not started", queued.Detail, StringComparison.Ordinal);
            Assert.True(queued.Started + TimeSpan.FromSeconds(queued.Seconds) < victimStop.Signal + TimeSpan.FromSeconds(1), $"the waiting tile {queued.TileKey} went back {(queued.Started + TimeSpan.FromSeconds(queued.Seconds) - victimStop.Signal).TotalSeconds:F2} s after the signal");
        }

        Assert.InRange(returned.Count(a => a.Started < victimStop.Signal), 1, 1 + TileLookahead.Depth);
        output.WriteLine($"victim exited {victimStop.Elapsed.TotalSeconds:F2} s after SIGTERM (drain {drain.TotalSeconds} s); its tile {held.TileKey} was answered as handed back {(answered - victimStop.Signal).TotalSeconds:F2} s after the signal; {returned.Count} returned attempts, {attempts.Count} attempts in all");

        Assert.DoesNotContain(attempts, a => a.Worker == "victim" && a.Outcome == "merged");
        Assert.DoesNotContain(attempts, a => a.Worker == "victim" && a.Outcome is "failed" or "lost" or "timeout");
        Assert.True(victimStop.Elapsed < drain + ExitMargin, $"the victim took {victimStop.Elapsed.TotalSeconds:F1} s to exit after SIGTERM (drain {drain.TotalSeconds} s)");
    }

    [Fact]
    public async Task SIGTERM_of_a_worker_mid_tile_within_its_drain_lets_it_finish_and_return_the_tile_and_loses_no_tile_and_duplicates_none()
    {
        // Tiles of 1.5 s or more, a 20 s drain: the tile in flight finishes on the victim and is merged from it.
        var drain = TimeSpan.FromSeconds(20);
        var (outcome, attempts, merged, victimStop) = await SweepWithVictimStopped("slow:1500", drain);

        Assert.Equal(ClusterScenario.ReferenceHash(), outcome.ContentHash);
        Assert.Equal(Grid, merged);
        var spanning = attempts.Where(a => a.Worker == "victim" && a.Outcome == "merged"
            && a.Started < victimStop.Signal && a.Started + TimeSpan.FromSeconds(a.Seconds) > victimStop.Signal).ToList();
        Assert.Single(spanning);
        output.WriteLine($"victim exited {victimStop.Elapsed.TotalSeconds:F2} s after SIGTERM; its tile {spanning[0].TileKey} finished {(spanning[0].Started + TimeSpan.FromSeconds(spanning[0].Seconds) - victimStop.Signal).TotalSeconds:F2} s after the signal and was merged from it; {attempts.Count} attempts in all");
        Assert.DoesNotContain(attempts, a => a.Worker == "victim" && a.Outcome is "failed" or "lost" or "timeout");

        // After its deregistration the victim was given nothing more.
        Assert.DoesNotContain(attempts, a => a.Worker == "victim" && a.Started > victimStop.Signal + TimeSpan.FromSeconds(1));
        Assert.True(victimStop.Elapsed < drain + ExitMargin, $"the victim took {victimStop.Elapsed.TotalSeconds:F1} s to exit after SIGTERM (drain {drain.TotalSeconds} s)");
    }

    [Fact]
    public async Task SIGTERM_of_the_coordinator_mid_sweep_merges_its_tiles_in_flight_exits_0_and_a_restart_resumes_from_exactly_the_merged_tiles()
    {
        var reference = ClusterScenario.ReferenceHash();
        using var directory = new TempDirectory();
        var db = directory.File("cluster.db");

        // Tiles of 0.5 s or more on two workers: two tiles are nearly always in flight when the signal comes.
        var first = ServerProcess.Coordinator($"sqlite:{db}", extra: ["--heartbeat", "0.5", "--drain-timeout", "20"]);
        var port = first.Port;
        using var worker1 = ServerProcess.Worker(first.Address, "w1", fault: "slow:500");
        using var worker2 = ServerProcess.Worker(first.Address, "w2", fault: "slow:500");
        SweepOutcome outcome;
        ServerProcess? second = null;
        DateTimeOffset signal;
        DateTimeOffset restart;
        HashSet<string> mergedBefore;
        try
        {
            using var client = new ClusterClient(first.Address) { ReconnectPatience = TimeSpan.FromSeconds(60) };
            var done = 0;
            var sweep = client.SweepAsync(ClusterScenario.Request(), new Progress<SweepProgressUpdate>(u => Volatile.Write(ref done, u.TilesDone)));
            await ClusterScenario.WaitUntil(() => Task.FromResult(Volatile.Read(ref done) >= 8), TimeSpan.FromSeconds(90), "eight tiles done");
            signal = DateTimeOffset.UtcNow;
            var clock = Stopwatch.StartNew();
            Assert.Equal(0, first.Stop(TimeSpan.FromSeconds(40)));
            Assert.True(clock.Elapsed < TimeSpan.FromSeconds(20) + ExitMargin, $"the coordinator took {clock.Elapsed.TotalSeconds:F1} s to exit after SIGTERM");
            output.WriteLine($"coordinator exited {clock.Elapsed.TotalSeconds:F2} s after SIGTERM");
            Assert.NotEmpty(first.EventsWith("coordinator stopping: no new sweeps or asks"));
            Assert.NotEmpty(first.EventsWith("paused: the coordinator is stopping"));
            var stopped = Assert.Single(first.EventsWith("coordinator stopped"));
            Assert.Equal("every tile in flight came back", stopped.GetProperty("Drain").GetString());
            Assert.False(sweep.IsCompleted, "the client gave up on the sweep instead of waiting for the restart");

            // What the stopped coordinator left: the write-ahead log checkpointed, every merged tile recorded as merged.
            var wal = new FileInfo(db + "-wal");
            Assert.True(!wal.Exists || wal.Length == 0, "the WAL still holds pages after a clean stop");
            using (var ledger = SqliteAtlasStore.Open(db))
            {
                var running = Assert.Single(ledger.UnfinishedSweepRequests());
                var record = ledger.Sweep(running.SweepId)!;
                Assert.Equal("running", record.State);
                var attempts = ledger.Attempts(running.SweepId);
                mergedBefore = [.. attempts.Where(a => a.Outcome == "merged").Select(a => a.TileKey)];
                Assert.Equal(record.FinishedTiles, mergedBefore.Count);
                Assert.Equal(attempts.Count(a => a.Outcome == "merged"), mergedBefore.Count);

                // At least one tile was in flight at the signal and was merged during the drain, not dropped.
                Assert.Contains(attempts, a => a.Outcome == "merged" && a.Started < signal && a.Started + TimeSpan.FromSeconds(a.Seconds) > signal);
                Assert.DoesNotContain(attempts, a => a.Outcome is "lost" or "timeout");
            }

            restart = DateTimeOffset.UtcNow;
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
        Assert.Equal(Grid.Length - mergedBefore.Count, outcome.TilesComputed);
        output.WriteLine($"{mergedBefore.Count} tiles merged before the stop, {outcome.TilesComputed} computed after the restart");
        using var store = SqliteAtlasStore.Open(db);
        var merged = store.Attempts(outcome.SweepId).Where(a => a.Outcome == "merged").ToList();

        // Every tile merged exactly once over both runs; the resumed run computed exactly the tiles not merged before.
        Assert.Equal(Grid, merged.Select(a => a.TileKey).Order(StringComparer.Ordinal));
        var mergedAfter = merged.Where(a => a.Started > restart).Select(a => a.TileKey).ToHashSet();
        Assert.Empty(mergedAfter.Intersect(mergedBefore));
        Assert.Equal(Grid, mergedBefore.Union(mergedAfter).Order(StringComparer.Ordinal));
        Assert.DoesNotContain(store.Attempts(outcome.SweepId), a => a.Outcome == "duplicate");
        Assert.Single(store.Versions(outcome.AtlasId));
        Assert.Equal(Grid, store.VersionTiles(outcome.AtlasId, outcome.AtlasVersion).Keys.Order(StringComparer.Ordinal));
    }

    /// <summary>
    /// Runs the scenario sweep on a steady worker and a victim (misbehaving with <paramref name="victimFault"/>,
    /// draining for <paramref name="drain"/>), SIGTERMs the victim while it computes a tile, and returns the outcome,
    /// the sweep's attempts, its merged tile keys (each checked to be merged once) and when and how fast the victim stopped.
    /// </summary>
    private static async Task<(SweepOutcome Outcome, IReadOnlyList<TileAttempt> Attempts, string[] Merged, (DateTimeOffset Signal, TimeSpan Elapsed) VictimStop)> SweepWithVictimStopped(
        string victimFault, TimeSpan drain)
    {
        using var directory = new TempDirectory();
        var db = directory.File("cluster.db");
        SweepOutcome outcome;
        DateTimeOffset signal;
        TimeSpan elapsed;
        using (var coordinator = ServerProcess.Coordinator($"sqlite:{db}", extra: ["--heartbeat", "0.5"]))
        {
            using var steady = ServerProcess.Worker(coordinator.Address, "steady");
            using var victim = ServerProcess.Worker(coordinator.Address, "victim", fault: victimFault, extra: ["--drain-timeout", $"{drain.TotalSeconds}"]);
            using var client = new ClusterClient(coordinator.Address);
            await ClusterScenario.WaitUntil(async () => (await ClusterScenario.Workers(client)).Count == 2, TimeSpan.FromSeconds(30), "two workers to register");

            // Mid-tile: the coordinator handed the victim a tile and the victim loaded the sweep's setup for it (it
            // does so once, on its first tile, right before the tile's deliberate wait).
            var sweep = client.SweepAsync(ClusterScenario.Request());
            await ClusterScenario.WaitUntil(
                async () => victim.EventsWith("sweep setup for family").Count > 0
                    && (await ClusterScenario.Workers(client)).Any(w => w.WorkerId == "victim" && w.TilesInFlight > 0),
                TimeSpan.FromSeconds(60),
                "the victim to be computing a tile");
            signal = DateTimeOffset.UtcNow;
            var clock = Stopwatch.StartNew();
            Assert.Equal(0, victim.Stop(drain + TimeSpan.FromSeconds(30)));
            elapsed = clock.Elapsed;

            // The victim said it had a tile in flight when the signal came, and deregistered.
            var stopping = Assert.Single(victim.EventsWith("stopping: no new tiles"));
            Assert.Equal(1, stopping.GetProperty("Running").GetInt32());
            Assert.NotEmpty(victim.EventsWith("deregistered from the coordinator"));
            Assert.NotEmpty(coordinator.EventsWith("is stopping: no new tiles or asks"));

            outcome = await sweep.WaitAsync(TimeSpan.FromSeconds(180));
            Assert.Equal(0, coordinator.Stop(TimeSpan.FromSeconds(30)));
        }

        Assert.Equal(Grid.Length, outcome.Tiles);
        using var ledger = SqliteAtlasStore.Open(db);
        var attempts = ledger.Attempts(outcome.SweepId);
        var merged = attempts.Where(a => a.Outcome == "merged").Select(a => a.TileKey).ToList();
        Assert.Equal(merged.Count, merged.Distinct().Count());
        Assert.DoesNotContain(attempts, a => a.Outcome == "duplicate");
        Assert.Equal(Grid, ledger.VersionTiles(outcome.AtlasId, outcome.AtlasVersion).Keys.Order(StringComparer.Ordinal));
        return (outcome, attempts, [.. merged.Order(StringComparer.Ordinal)], (signal, elapsed));
    }
}
