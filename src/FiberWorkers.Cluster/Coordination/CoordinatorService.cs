using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Security;
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
    private readonly QueryRateLimiter _queries;

    public CoordinatorService(SweepManager sweeps, WorkerPool pool, AtlasCatalog catalog, AskRouter router, CoordinatorOptions options, QueryRateLimiter queries)
    {
        _sweeps = sweeps;
        _pool = pool;
        _catalog = catalog;
        _router = router;
        _options = options;
        _queries = queries;
    }

    public override async Task<SubmitSweepReply> SubmitSweep(SubmitSweepRequest request, ServerCallContext context)
    {
        var caller = Caller.Of(context);
        var reply = await Task.Run(() => _sweeps.Submit(request, Caller.Key(context), TenantScope.NamespaceOf(caller)), context.CancellationToken).ConfigureAwait(false);
        reply.AtlasId = TenantScope.Outside(caller, reply.AtlasId);
        return reply;
    }

    public override Task WatchSweep(WatchSweepRequest request, IServerStreamWriter<SweepProgressUpdate> responseStream, ServerCallContext context)
    {
        RequestChecks.WatchSweep(request);
        var caller = Caller.Of(context);
        if (caller?.Tenant is not null)
        {
            // Another tenant's sweep is as unknown as one that does not exist.
            if (_sweeps.AtlasOf(request.SweepId) is not { } atlas || !TenantScope.Sees(caller, atlas))
            {
                throw new RpcException(new Status(StatusCode.NotFound, $"sweep_id: no sweep {request.SweepId}"));
            }

            responseStream = new TenantProgressWriter(responseStream, caller);
        }

        return _sweeps.WatchAsync(request.SweepId, responseStream, context.CancellationToken);
    }

    public override Task<ListVersionsReply> ListVersions(ListVersionsRequest request, ServerCallContext context)
    {
        _queries.Take(Caller.Key(context));
        RequestChecks.ListVersions(request);
        var reply = new ListVersionsReply();
        var caller = Caller.Of(context);
        foreach (var version in _catalog.Versions(TenantScope.Inside(caller, request.AtlasId)).Where(v => TenantScope.Sees(caller, v.AtlasId)))
        {
            version.AtlasId = TenantScope.Outside(caller, version.AtlasId);
            reply.Versions.Add(version);
        }

        return Task.FromResult(reply);
    }

    public override Task<TileShard> FetchShard(ShardRequest request, ServerCallContext context)
    {
        _queries.Take(Caller.Key(context));
        var root = RequestChecks.FetchShard(request);
        var caller = Caller.Of(context);
        return Task.Run(
            () =>
            {
                var shard = ShardWithin(_catalog.Shard(_catalog.View(TenantScope.Inside(caller, request.AtlasId), request.Version), root));
                shard.AtlasId = TenantScope.Outside(caller, shard.AtlasId);
                return shard;
            },
            context.CancellationToken);
    }

    public override async Task<AskReply> Ask(AskRequest request, ServerCallContext context)
    {
        _queries.Take(Caller.Key(context));
        RequestChecks.Ask(request, _options.Limits);
        var caller = Caller.Of(context);
        request.AtlasId = TenantScope.Inside(caller, request.AtlasId);
        var reply = await _router.AskAsync(request, context.CancellationToken).ConfigureAwait(false);
        reply.AtlasId = TenantScope.Outside(caller, reply.AtlasId);
        return reply;
    }

    public override Task<ListWorkersReply> ListWorkers(ListWorkersRequest request, ServerCallContext context)
    {
        var reply = new ListWorkersReply();
        reply.Workers.Add(_pool.Live().Select(w => w.ToMessage()));
        return Task.FromResult(reply);
    }

    public override Task<RegisterWorkerReply> RegisterWorker(RegisterWorkerRequest request, ServerCallContext context)
    {
        var address = RequestChecks.RegisterWorker(request);
        if (ChannelSecurity.Problem(address, _options.Security.Outbound) is { } unreachable)
        {
            throw RequestChecks.Invalid("address", unreachable);
        }

        _pool.Register(request.WorkerId, address, request.Threads);
        return Task.FromResult(new RegisterWorkerReply { HeartbeatSeconds = _options.Heartbeat.TotalSeconds });
    }

    public override Task<HeartbeatReply> Heartbeat(HeartbeatRequest request, ServerCallContext context)
    {
        RequestChecks.Heartbeat(request);
        return Task.FromResult(new HeartbeatReply { Known = _pool.Heartbeat(request.WorkerId) });
    }

    public override Task<DeregisterWorkerReply> DeregisterWorker(DeregisterWorkerRequest request, ServerCallContext context)
    {
        RequestChecks.DeregisterWorker(request);
        return Task.FromResult(new DeregisterWorkerReply { Known = _pool.Deregister(request.WorkerId, request.Final) });
    }

    public override Task<SweepSetup> FetchSweepSetup(SweepSetupRequest request, ServerCallContext context)
    {
        RequestChecks.FetchSweepSetup(request, _options.Limits);
        return Task.FromResult(_catalog.Setup(request.FamilyHash, request.Settings));
    }

    /// <summary>A shard too large to send is refused naming the limit, rather than failing in the transport.</summary>
    private TileShard ShardWithin(TileShard shard)
    {
        var size = shard.CalculateSize();
        return size <= _options.MaxMessageBytes
            ? shard
            : throw new RpcException(new Status(
                StatusCode.ResourceExhausted,
                $"shard {shard.TileKey} of atlas {shard.AtlasId}: {size} bytes exceeds the limit max-message-bytes = {_options.MaxMessageBytes}"));
    }
}
