using FiberWorkers.Atlas.Resolve;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Tests.Support;
using FiberWorkers.Cluster.Workers;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Testing;
using Google.Protobuf;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Units;

/// <summary>
/// A coordinator and two workers in this process (real gRPC over loopback): content hashes against the embedded
/// sweep, routing against direct asks and full solves, shards and their halos, and refusals of bad requests.
/// </summary>
public sealed class InProcessClusterTests : IAsyncLifetime
{
    private static readonly SweepOptions Options = new() { Divisions = [3, 3], LinesPerTile = 6, Seed = 21, MaxDegreeOfParallelism = 1 };
    private readonly TempDirectory _directory = new();
    private readonly List<WorkerServer> _workers = [];
    private Serilog.Core.Logger _log = null!;
    private SqliteAtlasStore _ledger = null!;
    private CoordinatorServer _coordinator = null!;
    private ClusterClient _client = null!;

    private static FiberWorkers.Algebra.Families.FamilyDefinition Family => TestFamilies.Example("two-link-arm");

    public async Task InitializeAsync()
    {
        _log = new Serilog.LoggerConfiguration().CreateLogger();
        _ledger = SqliteAtlasStore.Open(_directory.File("cluster.db"));
        var listen = ListenAddress.Parse("127.0.0.1:0", "test");
        _coordinator = await CoordinatorServer.StartAsync(_ledger, CoordinatorOptions.Default with { StartFiberThreads = 2 }, listen, _log);
        for (var i = 0; i < 2; i++)
        {
            _workers.Add(await WorkerServer.StartAsync(new WorkerOptions { Coordinator = _coordinator.Address, Threads = 1, Id = $"in-{i}" }, listen, _log));
        }

        _client = new ClusterClient(_coordinator.Address);
        await ClusterScenario.WaitUntil(async () => (await ClusterScenario.Workers(_client)).Count == 2, TimeSpan.FromSeconds(20), "two workers");
    }

    public async Task DisposeAsync()
    {
        _client.Dispose();
        foreach (var worker in _workers)
        {
            await worker.DisposeAsync();
        }

        await _coordinator.DisposeAsync();
        _ledger.Dispose();
        await _log.DisposeAsync();
        _directory.Dispose();
    }

    [Fact]
    public async Task The_cluster_sweep_has_the_embedded_content_hash_and_asks_agree_with_full_solves_and_direct_routing()
    {
        string embedded;
        using (var local = SqliteAtlasStore.Open(_directory.File("embedded.db")))
        {
            embedded = new SweepRunner(local).Run(Family, Options).ContentHash;
        }

        var request = new SubmitSweepRequest { FamilyJson = JsonFormatter.Default.Format(Family.Message), Settings = Conversions.ToSettings(Options) };
        var outcome = await _client.SweepAsync(request).WaitAsync(TimeSpan.FromSeconds(120));
        Assert.Equal(embedded, outcome.ContentHash);
        Assert.Equal(9, outcome.Tiles);

        // Submitting it again while nothing runs starts a new sweep over the same content.
        var again = await _client.SweepAsync(request).WaitAsync(TimeSpan.FromSeconds(120));
        Assert.Equal(embedded, again.ContentHash);
        Assert.Equal(2, again.AtlasVersion);

        var snapshot = AtlasSnapshot.Load(_ledger, "cluster.db");
        var resolver = AtlasResolver.Create(_ledger, snapshot);
        var random = new SeededRandom(5);
        for (var i = 0; i < 40; i++)
        {
            var point = Family.Parameters.Select(p => p.Low + (p.Width * random.NextDouble())).ToArray();
            var ask = new AskRequest { AtlasId = outcome.AtlasId, RequestId = $"q{i}" };
            ask.Point.Add(point);
            var routed = await _client.AskAsync(ask);
            var direct = await _client.AskDirectAsync(ask);
            Assert.Equal($"q{i}", routed.RequestId);
            Assert.Equal(routed.WorkerId, direct.WorkerId);
            Assert.Equal(routed.TileKey, direct.TileKey);
            Assert.Equal(resolver.SolveFull(point).RealCount, routed.RealCount);
            Assert.Equal(routed.RealCount, direct.RealCount);
            Assert.Equal(routed.RealCount, routed.Solutions.Count);
        }
    }

    [Fact]
    public async Task A_shard_holds_its_tile_and_the_neighbouring_tiles()
    {
        var request = new SubmitSweepRequest { FamilyJson = JsonFormatter.Default.Format(Family.Message), Settings = Conversions.ToSettings(Options) };
        var outcome = await _client.SweepAsync(request).WaitAsync(TimeSpan.FromSeconds(120));
        var corner = await _client.Coordinator.FetchShardAsync(new ShardRequest { AtlasId = outcome.AtlasId, TileKey = "L0:0,0" });
        Assert.Equal(["L0:0,0", "L0:0,1", "L0:1,0", "L0:1,1"], corner.Tiles.Select(t => t.TileKey).Order(StringComparer.Ordinal));
        var centre = await _client.Coordinator.FetchShardAsync(new ShardRequest { AtlasId = outcome.AtlasId, TileKey = "L0:1,1", Version = outcome.AtlasVersion });
        Assert.Equal(9, centre.Tiles.Count);
        Assert.Equal([3, 3], centre.Divisions);
        Assert.NotEmpty(centre.StartFiber);
    }

    public static TheoryData<string, string> BadAsks => new()
    {
        { "point", "1 values given, the family has 2 parameters" },
        { "nan", "point: value 2 is NaN" },
        { "atlas", "atlas_id: no atlas 'a000000000000000'" },
        { "version", "version: atlas" },
    };

    [Theory]
    [MemberData(nameof(BadAsks))]
    public async Task Bad_asks_are_refused_with_the_field_named(string what, string message)
    {
        var request = new SubmitSweepRequest { FamilyJson = JsonFormatter.Default.Format(Family.Message), Settings = Conversions.ToSettings(Options) };
        var outcome = await _client.SweepAsync(request).WaitAsync(TimeSpan.FromSeconds(120));
        var ask = new AskRequest { AtlasId = outcome.AtlasId };
        ask.Point.Add(what == "point" ? [0.1] : [0.1, what == "nan" ? double.NaN : 0.2]);
        if (what == "atlas")
        {
            ask.AtlasId = "a000000000000000";
        }

        if (what == "version")
        {
            ask.Version = 99;
        }

        var error = await Assert.ThrowsAsync<RpcException>(() => _client.AskAsync(ask));
        Assert.Equal(what is "atlas" or "version" ? StatusCode.NotFound : StatusCode.InvalidArgument, error.StatusCode);
        Assert.Contains(message, error.Status.Detail, StringComparison.Ordinal);
    }

    public static TheoryData<string, string> BadSubmissions => new()
    {
        { "json", "family_json: " },
        { "equation", "equation 1" },
        { "divisions", "settings: 3 tile divisions given for 2 parameters" },
        { "lines", "settings.lines_per_tile: must be between 1 and 10000, got 0" },
        { "method", "settings.start_method must be auto, total-degree or monodromy" },
        { "missing", "settings: is required" },
    };

    [Theory]
    [MemberData(nameof(BadSubmissions))]
    public async Task Bad_submissions_are_refused_before_anything_runs(string what, string message)
    {
        var json = JsonFormatter.Default.Format(Family.Message);
        var settings = Conversions.ToSettings(Options);
        switch (what)
        {
            case "json": json = "{ \"family\": "; break;
            case "equation": json = json.Replace("\"equations\": [ \"", "\"equations\": [ \"zz + ", StringComparison.Ordinal); break;
            case "divisions": settings.Divisions.Add(2); break;
            case "lines": settings.LinesPerTile = 0; break;
            case "method": settings.StartMethod = "guess"; break;
            case "missing": settings = null; break;
        }

        var request = new SubmitSweepRequest { FamilyJson = json, Settings = settings };
        var error = await Assert.ThrowsAsync<RpcException>(async () => await _client.Coordinator.SubmitSweepAsync(request));
        Assert.Equal(StatusCode.InvalidArgument, error.StatusCode);
        Assert.Contains(message, error.Status.Detail, StringComparison.Ordinal);
        Assert.Empty(_ledger.UnfinishedSweepRequests());
    }

    [Theory]
    [InlineData("", "http://127.0.0.1:9", 1, "worker_id: is required")]
    [InlineData("w", "ftp://127.0.0.1:9", 1, "address: 'ftp://127.0.0.1:9' is not an address")]
    [InlineData("w", "http://127.0.0.1:9/path", 1, "is not an address")]
    [InlineData("w", "http://127.0.0.1:9", 0, "threads: must be between 1 and 4096")]
    public async Task Bad_registrations_are_refused(string id, string address, int threads, string message)
    {
        var error = await Assert.ThrowsAsync<RpcException>(async () =>
            await _client.Coordinator.RegisterWorkerAsync(new RegisterWorkerRequest { WorkerId = id, Address = address, Threads = threads }));
        Assert.Equal(StatusCode.InvalidArgument, error.StatusCode);
        Assert.Contains(message, error.Status.Detail, StringComparison.Ordinal);
    }
}
