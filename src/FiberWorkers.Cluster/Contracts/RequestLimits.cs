using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Cluster.Contracts;

/// <summary>
/// Limits on what one request may ask a server to do, checked before any work starts. A request over a size or
/// shape limit is refused with InvalidArgument, one over a rate or concurrency limit with ResourceExhausted; the
/// message names the limit as its command-line option (without the dashes), its configured value and the request's
/// value ("sweep: 40000 tiles exceeds the limit max-tiles-per-sweep = 10000"). The coordinator applies all of them;
/// a worker applies the family, path and sweep-shape limits to the tiles and resolves it is given.
/// </summary>
public sealed record RequestLimits
{
    /// <summary>The defaults, suitable for a shared cluster.</summary>
    public static RequestLimits Default { get; } = new();

    /// <summary>
    /// Limits on every family a request carries or a server reads back (size in bytes, expression nodes, degree,
    /// unknowns, parameters and the rest of <see cref="FamilyLimits"/>). Default <see cref="FamilyLimits.Default"/>.
    /// </summary>
    public FamilyLimits Family { get; init; } = FamilyLimits.Default;

    /// <summary>
    /// Most paths one solve may track (option <c>max-paths</c>): before a sweep, the family's Bézout number when its
    /// start fiber is computed by total degree, else its stated root count (the Bézout number when none is stated,
    /// as it bounds the solutions); on a worker, the root count of each start fiber a tile or resolve tracks from.
    /// Default 20,000.
    /// </summary>
    public long MaxPaths { get; init; } = 20_000;

    /// <summary>
    /// Most tiles one sweep may plan (option <c>max-tiles-per-sweep</c>): the level-0 tiles (the product of the
    /// divisions) plus what refinement may add, 2^m children per refined tile and level in m parameters, or at most
    /// the sweep's sample budget when it has one (each refined tile adds at least one sample). Default 10,000.
    /// </summary>
    public long MaxTilesPerSweep { get; init; } = 10_000;

    /// <summary>
    /// Most samples one sweep may plan (option <c>max-samples-per-sweep</c>): planned tiles × lines per tile × 2 (a
    /// line yields at least its own point and one interval midpoint, and three more per crossing), and the sweep's
    /// sample budget when it states one. Default 1,000,000.
    /// </summary>
    public long MaxSamplesPerSweep { get; init; } = 1_000_000;

    /// <summary>
    /// Sweeps one caller may have running at once on the coordinator (option <c>max-concurrent-sweeps</c>); joining a
    /// sweep that already runs does not count as another. Default 2.
    /// </summary>
    public int MaxConcurrentSweeps { get; init; } = 2;

    /// <summary>
    /// Queries (Ask, ListVersions, FetchShard) one caller may make per second on average (option <c>query-rate</c>);
    /// a token bucket of <see cref="QueryBurst"/> tokens refilled at this rate. Default 200 per second.
    /// </summary>
    public double QueryRate { get; init; } = 200;

    /// <summary>Queries one caller may make at once after being idle (option <c>query-burst</c>). Default 400.</summary>
    public int QueryBurst { get; init; } = 400;
}
