using FiberWorkers.Contracts.V1;
using Grpc.Core;

namespace FiberWorkers.Cluster.Workers;

/// <summary>The worker's gRPC service.</summary>
public sealed class WorkerService(WorkerRuntime runtime) : Worker.WorkerBase
{
    public override Task<TileOutcome> RunTile(TileTask request, ServerCallContext context) => runtime.RunTileAsync(request, context.CancellationToken);

    public override Task<AskReply> Resolve(ResolveRequest request, ServerCallContext context) => runtime.ResolveAsync(request, context.CancellationToken);
}
