using FiberWorkers.Cluster.Contracts;

namespace FiberWorkers.Cluster.Workers;

/// <summary>How a worker runs. Nothing here shapes atlas content.</summary>
public sealed record WorkerOptions
{
    /// <summary>The coordinator to register with, e.g. http://127.0.0.1:7400.</summary>
    public required Uri Coordinator { get; init; }

    /// <summary>The worker's id: unique per process (a restarted worker is a new worker).</summary>
    public string Id { get; init; } = $"{Environment.MachineName.ToLowerInvariant()}-{Environment.ProcessId}-{Guid.NewGuid().ToString("N")[..6]}";

    /// <summary>The address the coordinator and clients call; null: the bound address.</summary>
    public Uri? Advertise { get; init; }

    /// <summary>Tiles computed at once, and resolves answered at once.</summary>
    public int Threads { get; init; } = Environment.ProcessorCount;

    /// <summary>Resolves waiting for a thread beyond which new ones are refused (ResourceExhausted).</summary>
    public int ResolveQueue { get; init; } = 256;

    /// <summary>Tile shards kept (least recently used ones are dropped).</summary>
    public int ShardCache { get; init; } = 64;

    /// <summary>Sweep setups (family and start fibers) kept.</summary>
    public int SetupCache { get; init; } = 4;

    /// <summary>
    /// How long tiles and resolves in flight may run on after SIGTERM before the worker stops anyway (tiles cut short
    /// are retried elsewhere by the coordinator).
    /// </summary>
    public TimeSpan DrainTimeout { get; init; } = TimeSpan.FromSeconds(20);

    /// <summary>
    /// TLS of the listener, the tokens calls need (the coordinator's worker token; query tokens for direct asks), and
    /// how the worker calls its coordinator (roots, client certificate, worker-role token). Default: none (loopback only).
    /// </summary>
    public FiberWorkers.Cluster.Security.ServerSecurity Security { get; init; } = FiberWorkers.Cluster.Security.ServerSecurity.None;

    /// <summary>
    /// Largest message accepted or sent, in bytes (option <c>max-message-bytes</c>); a larger request is refused with
    /// ResourceExhausted naming the limit. Default 64 MiB (shards of dense atlases run to tens of megabytes).
    /// </summary>
    public int MaxMessageBytes { get; init; } = 64 << 20;

    /// <summary>Limits checked on the tiles and resolves it is given before any work (see <see cref="RequestLimits"/>). Default <see cref="RequestLimits.Default"/>.</summary>
    public RequestLimits Limits { get; init; } = RequestLimits.Default;

    /// <summary>
    /// Deliberate misbehaviour for fault tests only (from the FIBER_WORKER_FAULT environment variable): "garbage"
    /// answers tiles with a wrong result, "hang" never answers them, "slow:MS" waits MS milliseconds before each tile.
    /// </summary>
    public string? Fault { get; init; }

    /// <summary>
    /// The admin listener (plain HTTP/1.1: <c>/metrics</c> in Prometheus text format, <c>/healthz</c>, <c>/readyz</c>);
    /// null (the default): none.
    /// </summary>
    public Hosting.ListenAddress? AdminListen { get; init; }
}
