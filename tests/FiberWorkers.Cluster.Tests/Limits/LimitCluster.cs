using System.Text;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Tests.Support;
using FiberWorkers.Cluster.Workers;
using FiberWorkers.Contracts.V1;
using Grpc.Core;
using Grpc.Net.Client;

namespace FiberWorkers.Cluster.Tests.Limits;

/// <summary>
/// A coordinator in this process with the limits a test configures, optionally with workers, and raw gRPC clients
/// without client-side message limits (so the server's own limits are what refuses). Each client is a channel of its
/// own: without tokens the caller key is the peer, so two clients are two callers.
/// </summary>
internal sealed class LimitCluster : IAsyncDisposable
{
    private readonly TempDirectory _directory = new();
    private readonly List<GrpcChannel> _channels = [];
    private readonly List<WorkerServer> _workers = [];
    private Serilog.Core.Logger _log = null!;
    private SqliteAtlasStore _ledger = null!;

    public CoordinatorServer Coordinator { get; private set; } = null!;

    public SqliteAtlasStore Ledger => _ledger;

    public static async Task<LimitCluster> StartAsync(CoordinatorOptions options)
    {
        var cluster = new LimitCluster { _log = new Serilog.LoggerConfiguration().CreateLogger() };
        cluster._ledger = SqliteAtlasStore.Open(cluster._directory.File("limits.db"));
        cluster.Coordinator = await CoordinatorServer.StartAsync(cluster._ledger, options with { StartFiberThreads = 1 }, ListenAddress.Parse("127.0.0.1:0", "test"), cluster._log);
        return cluster;
    }

    public async Task<WorkerServer> AddWorkerAsync(WorkerOptions options)
    {
        var worker = await WorkerServer.StartAsync(options with { Coordinator = Coordinator.Address }, ListenAddress.Parse("127.0.0.1:0", "test"), _log);
        _workers.Add(worker);
        return worker;
    }

    /// <summary>A new caller of the coordinator.</summary>
    public Coordinator.CoordinatorClient Client() => new(Channel(Coordinator.Address));

    /// <summary>A client of a worker.</summary>
    public Worker.WorkerClient WorkerClient(WorkerServer worker) => new(Channel(worker.Address));

    public async ValueTask DisposeAsync()
    {
        foreach (var channel in _channels)
        {
            channel.Dispose();
        }

        foreach (var worker in _workers)
        {
            await worker.DisposeAsync();
        }

        await Coordinator.DisposeAsync();
        _ledger.Dispose();
        await _log.DisposeAsync();
        _directory.Dispose();
    }

    /// <summary>A sweep submission of <paramref name="familyJson"/> with the given shape.</summary>
    public static SubmitSweepRequest Sweep(string familyJson, int[] divisions, int lines = 1, int refineDepth = 0, long sampleBudget = 0, ulong seed = 1)
    {
        var settings = new SweepSettings { LinesPerTile = lines, Seed = seed, DeltaFraction = 0.01, RefineDepth = refineDepth, SampleBudget = sampleBudget, StartMethod = "auto" };
        settings.Divisions.Add(divisions);
        return new SubmitSweepRequest { FamilyJson = familyJson, Settings = settings, Source = "limits.json" };
    }

    /// <summary>Family JSON padded (in its description) to exactly <paramref name="bytes"/> UTF-8 bytes.</summary>
    public static string Padded(string familyJson, int bytes)
    {
        var bare = familyJson.Insert(1, "\"description\":\"\",");
        var missing = bytes - Encoding.UTF8.GetByteCount(bare);
        Assert.True(missing >= 0, $"the family alone has {Encoding.UTF8.GetByteCount(bare)} bytes, above {bytes}");
        var padded = familyJson.Insert(1, $"\"description\":\"{new string('d', missing)}\",");
        Assert.Equal(bytes, Encoding.UTF8.GetByteCount(padded));
        return padded;
    }

    /// <summary>The call is refused with <paramref name="code"/> and a detail holding every one of <paramref name="parts"/>.</summary>
    public static async Task<RpcException> Refused(StatusCode code, Func<Task> call, params string[] parts)
    {
        var error = await Assert.ThrowsAsync<RpcException>(call);
        Assert.True(error.StatusCode == code, $"expected {code}, got {error.StatusCode}: {error.Status.Detail}");
        foreach (var part in parts)
        {
            Assert.Contains(part, error.Status.Detail, StringComparison.Ordinal);
        }

        return error;
    }

    private GrpcChannel Channel(Uri address)
    {
        var channel = GrpcChannel.ForAddress(address, new GrpcChannelOptions { MaxReceiveMessageSize = null, MaxSendMessageSize = null });
        _channels.Add(channel);
        return channel;
    }
}
