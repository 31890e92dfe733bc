using FiberWorkers.Cluster.Contracts;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>How the coordinator schedules, retries and routes. Nothing here shapes atlas content.</summary>
public sealed record CoordinatorOptions
{
    public static CoordinatorOptions Default { get; } = new();

    /// <summary>Interval workers heartbeat at; a worker silent for <see cref="MissedHeartbeats"/> intervals is lost.</summary>
    public TimeSpan Heartbeat { get; init; } = TimeSpan.FromSeconds(1);

    public int MissedHeartbeats { get; init; } = 3;

    /// <summary>Deadline of one attempt at a tile; past it the tile goes to another worker.</summary>
    public TimeSpan TileDeadline { get; init; } = TimeSpan.FromMinutes(10);

    /// <summary>
    /// Tiles sent to a worker beyond its threads, to wait there for one (0 up to <see cref="Contracts.TileLookahead.Depth"/>,
    /// what a worker accepts). Default <see cref="Contracts.TileLookahead.Depth"/>.
    /// </summary>
    public int TileLookahead { get; init; } = Contracts.TileLookahead.Depth;

    /// <summary>Attempts at one tile before the sweep fails (it can be resumed by submitting it again).</summary>
    public int MaxTileAttempts { get; init; } = 12;

    /// <summary>First retry delay of a failed tile (exponential backoff with jitter, capped by <see cref="RetryMaxDelay"/>).</summary>
    public TimeSpan RetryDelay { get; init; } = TimeSpan.FromMilliseconds(200);

    public TimeSpan RetryMaxDelay { get; init; } = TimeSpan.FromSeconds(5);

    /// <summary>A worker's circuit opens when this share of its recent tile calls failed ...</summary>
    public double BreakFailureRatio { get; init; } = 0.5;

    /// <summary>... with at least this many calls in the sampling window ...</summary>
    public int BreakMinimumThroughput { get; init; } = 3;

    public TimeSpan BreakSampling { get; init; } = TimeSpan.FromSeconds(30);

    /// <summary>... and stays open this long before one trial call.</summary>
    public TimeSpan BreakDuration { get; init; } = TimeSpan.FromSeconds(5);

    /// <summary>Asks forwarded to one worker and not yet answered; beyond this, asks are refused (ResourceExhausted).</summary>
    public int AskQueuePerWorker { get; init; } = 256;

    /// <summary>Deadline of a forwarded ask.</summary>
    public TimeSpan AskDeadline { get; init; } = TimeSpan.FromSeconds(30);

    /// <summary>Threads for the start fibers the coordinator computes before handing out tiles.</summary>
    public int StartFiberThreads { get; init; } = Environment.ProcessorCount;

    /// <summary>How long calls in flight may run on after SIGTERM before the server stops anyway.</summary>
    public TimeSpan DrainTimeout { get; init; } = TimeSpan.FromSeconds(20);

    /// <summary>
    /// TLS of the listener, the tokens calls need, and how the coordinator calls workers (its roots, client certificate
    /// and worker-role token). Default: none of it (loopback only).
    /// </summary>
    public FiberWorkers.Cluster.Security.ServerSecurity Security { get; init; } = FiberWorkers.Cluster.Security.ServerSecurity.None;

    /// <summary>
    /// Largest message accepted or sent, in bytes (option <c>max-message-bytes</c>); a larger request is refused with
    /// ResourceExhausted naming the limit. Default 64 MiB (shards of dense atlases run to tens of megabytes).
    /// </summary>
    public int MaxMessageBytes { get; init; } = 64 << 20;

    /// <summary>Limits checked on every request before any work (see <see cref="RequestLimits"/>). Default <see cref="RequestLimits.Default"/>.</summary>
    public RequestLimits Limits { get; init; } = RequestLimits.Default;

    /// <summary>
    /// The admin listener (plain HTTP/1.1: <c>/metrics</c> in Prometheus text format, <c>/healthz</c>, <c>/readyz</c>);
    /// null (the default): none.
    /// </summary>
    public Hosting.ListenAddress? AdminListen { get; init; }
}
