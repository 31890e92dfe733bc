using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Contracts.V1;
using Grpc.Core;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>The coordinator's gRPC service: checks each request, then hands it to the component that owns it.</summary>
public sealed class CoordinatorService : Coordinator.CoordinatorBase
{
    private readonly SweepManager _sweeps;
    private readonly WorkerPool _pool;
    private readonly AtlasCatalog _catalog;
    private readonly AskRouter _router;
    private readonly CoordinatorOptions _options;

    public CoordinatorService(SweepManager sweeps, WorkerPool pool, AtlasCatalog catalog, AskRouter router, CoordinatorOptions options)
    {
        _sweeps = sweeps;
        _pool = pool;
        _catalog = catalog;
        _router = router;
        _options = options;
    }

    public override Task<SubmitSweepReply> SubmitSweep(SubmitSweepRequest request, ServerCallContext context) =>
        Task.Run(() => _sweeps.Submit(request), context.CancellationToken);

    public override Task WatchSweep(WatchSweepRequest request, IServerStreamWriter<SweepProgressUpdate> responseStream, ServerCallContext context)
    {
        if (request.SweepId <= 0)
        {
            throw RequestChecks.Invalid("sweep_id", $"must be a sweep id (positive), got {request.SweepId}");
        }

        return _sweeps.WatchAsync(request.SweepId, responseStream, context.CancellationToken);
    }

    public override Task<ListVersionsReply> ListVersions(ListVersionsRequest request, ServerCallContext context)
    {
        RequestChecks.Id(request.AtlasId, "atlas_id", required: false);
        var reply = new ListVersionsReply();
        reply.Versions.Add(_catalog.Versions(request.AtlasId));
        return Task.FromResult(reply);
    }

    public override Task<TileShard> FetchShard(ShardRequest request, ServerCallContext context)
    {
        RequestChecks.Id(request.AtlasId, "atlas_id");
        RequestChecks.Version(request.Version, "version");
        var root = RequestChecks.RootTile(request.TileKey, "tile_key");
        return Task.Run(() => _catalog.Shard(_catalog.View(request.AtlasId, request.Version), root), context.CancellationToken);
    }

    public override Task<AskReply> Ask(AskRequest request, ServerCallContext context) => _router.AskAsync(request, context.CancellationToken);

    public override Task<ListWorkersReply> ListWorkers(ListWorkersRequest request, ServerCallContext context)
    {
        var reply = new ListWorkersReply();
        reply.Workers.Add(_pool.Live().Select(w => w.ToMessage()));
        return Task.FromResult(reply);
    }

    public override Task<RegisterWorkerReply> RegisterWorker(RegisterWorkerRequest request, ServerCallContext context)
    {
        RequestChecks.Id(request.WorkerId, "worker_id");
        var address = RequestChecks.Address(request.Address, "address");
        if (request.Threads is < 1 or > 4096)
        {
            throw RequestChecks.Invalid("threads", $"must be between 1 and 4096, got {request.Threads}");
        }

        _pool.Register(request.WorkerId, address, request.Threads);
        return Task.FromResult(new RegisterWorkerReply { HeartbeatSeconds = _options.Heartbeat.TotalSeconds });
    }

    public override Task<HeartbeatReply> Heartbeat(HeartbeatRequest request, ServerCallContext context)
    {
        RequestChecks.Id(request.WorkerId, "worker_id");
        return Task.FromResult(new HeartbeatReply { Known = _pool.Heartbeat(request.WorkerId) });
    }

    public override Task<SweepSetup> FetchSweepSetup(SweepSetupRequest request, ServerCallContext context)
    {
        RequestChecks.Id(request.FamilyHash, "family_hash");
        RequestChecks.Settings(request.Settings, "settings");
        return Task.FromResult(_catalog.Setup(request.FamilyHash, request.Settings));
    }
}
