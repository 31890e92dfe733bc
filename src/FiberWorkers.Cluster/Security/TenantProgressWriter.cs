using FiberWorkers.Contracts.V1;
using Grpc.Core;

namespace FiberWorkers.Cluster.Security;

/// <summary>Writes a tenant's sweep progress with the atlas ids it knows (its namespace taken off).</summary>
internal sealed class TenantProgressWriter(IServerStreamWriter<SweepProgressUpdate> inner, Caller caller) : IServerStreamWriter<SweepProgressUpdate>
{
    public WriteOptions? WriteOptions
    {
        get => inner.WriteOptions;
        set => inner.WriteOptions = value;
    }

    public Task WriteAsync(SweepProgressUpdate message) => inner.WriteAsync(Outward(message));

    public Task WriteAsync(SweepProgressUpdate message, CancellationToken cancellationToken) => inner.WriteAsync(Outward(message), cancellationToken);

    private SweepProgressUpdate Outward(SweepProgressUpdate message)
    {
        ArgumentNullException.ThrowIfNull(message);
        var outward = message.Clone();
        outward.AtlasId = TenantScope.Outside(caller, outward.AtlasId);
        if (outward.Outcome is { } outcome)
        {
            outcome.AtlasId = TenantScope.Outside(caller, outcome.AtlasId);
        }

        return outward;
    }
}
