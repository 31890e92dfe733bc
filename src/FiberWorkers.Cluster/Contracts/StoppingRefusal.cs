using Grpc.Core;

namespace FiberWorkers.Cluster.Contracts;

/// <summary>
/// The refusal of a server that is stopping: Unavailable with a plain message and the trailer
/// <c>fiber-stopping</c>, so a caller can tell "hand this to someone else, nothing is wrong with the work" from a
/// failure. A worker answers a tile with it when it will not start the tile or hands it back unfinished; the
/// coordinator answers new sweeps and asks with it while it drains.
/// </summary>
internal static class StoppingRefusal
{
    /// <summary>The trailer's key; its value names who is stopping ("worker" or "coordinator").</summary>
    public const string TrailerKey = "fiber-stopping";

    public static RpcException Create(string role, string message)
    {
        var trailers = new Metadata { { TrailerKey, role } };
        return new RpcException(new Status(StatusCode.Unavailable, message), trailers);
    }

    /// <summary>True for a refusal made by <see cref="Create"/> (Unavailable with the trailer).</summary>
    public static bool Is(RpcException e)
    {
        ArgumentNullException.ThrowIfNull(e);
        return e.StatusCode == StatusCode.Unavailable && e.Trailers.Get(TrailerKey) is not null;
    }
}
