using Grpc.Core;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// Who made a call, as the authentication interceptor established it: the token's name (never the token itself),
/// its tenant (null: not scoped) and its roles. Services read it with <see cref="Of"/>; limits key on <see cref="Key"/>.
/// </summary>
public sealed record Caller(string Name, string? Tenant, IReadOnlySet<string> Roles)
{
    /// <summary>The key under which the interceptor stores the caller in <see cref="ServerCallContext.UserState"/>.</summary>
    public const string UserStateKey = "fiberworkers.caller";

    /// <summary>The caller of a call, or null when the server runs without tokens (loopback plaintext).</summary>
    public static Caller? Of(ServerCallContext context) =>
        context.UserState.TryGetValue(UserStateKey, out var value) ? value as Caller : null;

    /// <summary>What per-caller limits count against: the token's name, or the peer address without tokens.</summary>
    public static string Key(ServerCallContext context) => Of(context)?.Name ?? context.Peer ?? "unknown";
}
