using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using Grpc.Core;

namespace FiberWorkers.Cluster.Workers;

/// <summary>The worker's gRPC service.</summary>
public sealed class WorkerService(WorkerRuntime runtime) : Worker.WorkerBase
{
    public override Task<TileOutcome> RunTile(TileTask request, ServerCallContext context) => runtime.RunTileAsync(request, context.CancellationToken);

    public override async Task<AskReply> Resolve(ResolveRequest request, ServerCallContext context)
    {
        // A tenant's direct ask names the atlas as the tenant knows it; the coordinator's forwards carry store ids.
        var caller = Caller.Of(context);
        if (caller?.Tenant is not null && request.Ask is { } ask)
        {
            ask.AtlasId = TenantScope.Inside(caller, ask.AtlasId);
        }

        var reply = await runtime.ResolveAsync(request, context.CancellationToken).ConfigureAwait(false);
        reply.AtlasId = TenantScope.Outside(caller, reply.AtlasId);
        return reply;
    }
}
