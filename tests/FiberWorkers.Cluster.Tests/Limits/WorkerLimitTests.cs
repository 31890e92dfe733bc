using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Workers;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Testing;
using Google.Protobuf;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Limits;

/// <summary>
/// A worker's limits, called directly after a real sweep committed (its start fibers are what tiles and resolves
/// track from): a worker whose max-paths is the largest start fiber's root count computes the tile and answers the
/// resolve; one with a path less, or a tile limit one below the sweep's tiles, refuses with InvalidArgument naming the
/// limit, before any solve.
/// </summary>
public sealed class WorkerLimitTests : IAsyncLifetime
{
    private static readonly SweepOptions Options = new() { Divisions = [3], LinesPerTile = 2, Seed = 5, MaxDegreeOfParallelism = 1 };

    private LimitCluster _cluster = null!;
    private SweepOutcome _outcome = null!;
    private int _paths;
    private string _largest = string.Empty;

    private static FiberWorkers.Algebra.Families.FamilyDefinition Family => TestFamilies.Example("two-bus");

    public async Task InitializeAsync()
    {
        _cluster = await LimitCluster.StartAsync(CoordinatorOptions.Default);
        await _cluster.AddWorkerAsync(new WorkerOptions { Coordinator = _cluster.Coordinator.Address, Threads = 1, Id = "plain" });
        using var client = new ClusterClient(_cluster.Coordinator.Address);
        var request = new SubmitSweepRequest { FamilyJson = JsonFormatter.Default.Format(Family.Message), Settings = Conversions.ToSettings(Options) };
        _outcome = await client.SweepAsync(request).WaitAsync(TimeSpan.FromSeconds(120));

        foreach (var kind in new[] { "family", "folds", "passages" })
        {
            var fiber = StartFiberFile.Deserialize(_cluster.Ledger.GetBlob(SweepRunner.StartFiberKey(Family, Options, kind))!, kind);
            if (fiber.RootCount > _paths)
            {
                (_paths, _largest) = (fiber.RootCount, kind);
            }
        }
    }

    public async Task DisposeAsync() => await _cluster.DisposeAsync();

    [Fact]
    public async Task A_tile_is_computed_within_the_workers_limits_and_refused_one_path_or_one_tile_over_them()
    {
        var task = new TileTask { SweepId = _outcome.SweepId, FamilyHash = Family.ContentHash, Settings = Conversions.ToSettings(Options), TileKey = "L0:1", Attempt = 1 };
        var within = await Worker(RequestLimits.Default with { MaxPaths = _paths, MaxTilesPerSweep = 3 }, "within");
        var outcome = await within.RunTileAsync(task);
        Assert.Equal("L0:1", outcome.Result.TileKey);
        Assert.NotEmpty(outcome.Result.Samples);

        var fewerPaths = await Worker(RequestLimits.Default with { MaxPaths = _paths - 1 }, "fewer-paths");
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => fewerPaths.RunTileAsync(task).ResponseAsync,
            $"tile L0:1: each solve from the {_largest} start fiber tracks {_paths} paths exceeds the limit max-paths = {_paths - 1}");

        var fewerTiles = await Worker(RequestLimits.Default with { MaxTilesPerSweep = 2 }, "fewer-tiles");
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => fewerTiles.RunTileAsync(task).ResponseAsync,
            "sweep: 3 tiles exceeds the limit max-tiles-per-sweep = 2");
    }

    [Fact]
    public async Task A_resolve_is_answered_within_the_path_limit_and_refused_one_path_under_the_family_start_fiber()
    {
        // two-bus: B·sin δ = P has two operating points for |P| < B = 1.7 (the family's own description).
        var ask = new AskRequest { AtlasId = _outcome.AtlasId, Point = { 0.5 }, RequestId = "r1" };
        var resolve = new ResolveRequest { Ask = ask, TileKey = "L0:1", Version = _outcome.AtlasVersion };
        var within = await Worker(RequestLimits.Default with { MaxPaths = 2 }, "resolve-within");
        var reply = await within.ResolveAsync(resolve);
        Assert.Equal(2, reply.RealCount);

        var under = await Worker(RequestLimits.Default with { MaxPaths = 1 }, "resolve-under");
        await LimitCluster.Refused(StatusCode.InvalidArgument, () => under.ResolveAsync(resolve).ResponseAsync,
            "resolve in tile L0:1: each solve from the family start fiber tracks 2 paths exceeds the limit max-paths = 1");
    }

    [Fact]
    public async Task A_one_thread_worker_takes_one_tile_beyond_its_thread_and_refuses_the_next_with_ResourceExhausted()
    {
        // Each tile waits 1.5 s on its thread first, so the first runs while the second waits for the thread.
        var worker = await _cluster.AddWorkerAsync(new WorkerOptions { Coordinator = _cluster.Coordinator.Address, Threads = 1, Id = "lookahead", Fault = "slow:1500" });
        var client = _cluster.WorkerClient(worker);
        TileTask Task(string tile) => new() { SweepId = _outcome.SweepId, FamilyHash = Family.ContentHash, Settings = Conversions.ToSettings(Options), TileKey = tile, Attempt = 1 };

        var running = client.RunTileAsync(Task("L0:0")).ResponseAsync;
        var waiting = client.RunTileAsync(Task("L0:1")).ResponseAsync;
        await System.Threading.Tasks.Task.Delay(300);
        Assert.False(running.IsCompleted || waiting.IsCompleted);
        await LimitCluster.Refused(StatusCode.ResourceExhausted, () => client.RunTileAsync(Task("L0:2")).ResponseAsync,
            "all 1 tile threads are busy and 1 more tiles wait");

        // Both taken tiles are computed, one after the other on the one thread.
        var outcomes = await System.Threading.Tasks.Task.WhenAll(running, waiting).WaitAsync(TimeSpan.FromSeconds(60));
        Assert.Equal(["L0:0", "L0:1"], outcomes.Select(o => o.Result.TileKey));
        Assert.All(outcomes, o => Assert.NotEmpty(o.Result.Samples));
    }

    private async Task<Worker.WorkerClient> Worker(RequestLimits limits, string id)
    {
        var worker = await _cluster.AddWorkerAsync(new WorkerOptions { Coordinator = _cluster.Coordinator.Address, Threads = 1, Id = id, Limits = limits });
        return _cluster.WorkerClient(worker);
    }
}
