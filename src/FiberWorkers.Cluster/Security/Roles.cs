namespace FiberWorkers.Cluster.Security;

/// <summary>
/// The roles a token can hold and which of them may call each RPC. A call passes when the caller holds any one of
/// the RPC's roles; an RPC not in the table is refused (new RPCs must be added here to be reachable with tokens).
/// </summary>
public static class Roles
{
    /// <summary>Starts and follows sweeps.</summary>
    public const string Submit = "submit";

    /// <summary>Asks points and reads atlases (versions, shards) and the worker list.</summary>
    public const string Query = "query";

    /// <summary>What workers do with the coordinator (register, heartbeat, fetch setups and shards) and what the coordinator does with workers (tiles, resolves).</summary>
    public const string Worker = "worker";

    /// <summary>Every role, in the order the documentation lists them.</summary>
    public static IReadOnlyList<string> All { get; } = [Submit, Query, Worker];

    private const string CoordinatorService = "/fiberworkers.v1.Coordinator/";
    private const string WorkerService = "/fiberworkers.v1.Worker/";

    /// <summary>Full gRPC method name → the roles that may call it.</summary>
    public static IReadOnlyDictionary<string, IReadOnlyList<string>> ByMethod { get; } = new Dictionary<string, IReadOnlyList<string>>(StringComparer.Ordinal)
    {
        [CoordinatorService + "SubmitSweep"] = [Submit],
        [CoordinatorService + "WatchSweep"] = [Submit, Query],
        [CoordinatorService + "ListVersions"] = [Query],
        [CoordinatorService + "FetchShard"] = [Query, Worker],
        [CoordinatorService + "Ask"] = [Query],
        [CoordinatorService + "ListWorkers"] = [Query],
        [CoordinatorService + "RegisterWorker"] = [Worker],
        [CoordinatorService + "Heartbeat"] = [Worker],
        [CoordinatorService + "FetchSweepSetup"] = [Worker],
        [CoordinatorService + "DeregisterWorker"] = [Worker],
        [WorkerService + "RunTile"] = [Worker],

        // The coordinator forwards asks with its worker token; `ask --direct` sends them with a query token.
        [WorkerService + "Resolve"] = [Worker, Query],
    };

    /// <summary>Services open to every caller, token or not: health (orchestrators' probes carry no token).</summary>
    public static IReadOnlyList<string> OpenServices { get; } = ["/grpc.health.v1.Health/"];

    /// <summary>Services any valid token may call whatever its roles: server reflection (it describes the API, nothing more).</summary>
    public static IReadOnlyList<string> AnyTokenServices { get; } = ["/grpc.reflection.v1alpha.ServerReflection/", "/grpc.reflection.v1.ServerReflection/"];

    /// <summary>The RPC's short name for messages ("SubmitSweep").</summary>
    public static string ShortName(string method)
    {
        ArgumentNullException.ThrowIfNull(method);
        var slash = method.LastIndexOf('/');
        return slash >= 0 && slash < method.Length - 1 ? method[(slash + 1)..] : method;
    }
}
