using System.Diagnostics;
using System.Diagnostics.Metrics;

namespace FiberWorkers.Cluster.Hosting;

/// <summary>
/// The cluster's metrics: one <see cref="Meter"/> named <c>FiberWorkers</c> per server (the coordinator and each
/// worker own one; disposing it ends its series). Names follow the OpenTelemetry conventions; the Prometheus
/// exporter turns <c>fiberworkers.tiles</c> into <c>fiberworkers_tiles_total</c>, a histogram in seconds into
/// <c>..._seconds_bucket/_sum/_count</c>. The numerical layers know nothing of it: the coordinator and the workers
/// record what they already have (attempt outcomes, tile and answer path counts, queue lengths).
/// </summary>
public sealed class ClusterMetrics : IDisposable
{
    /// <summary>The meter's name, as an OpenTelemetry metrics provider selects it.</summary>
    public const string MeterName = "FiberWorkers";

    /// <summary>Resolve latency buckets, seconds: 10 µs to 10 s, three per decade (a real-only track takes tens of
    /// microseconds to milliseconds, a full solve of a large family seconds).</summary>
    internal static readonly double[] ResolveBuckets =
        [1e-5, 2.5e-5, 5e-5, 1e-4, 2.5e-4, 5e-4, 1e-3, 2.5e-3, 5e-3, 1e-2, 2.5e-2, 5e-2, 0.1, 0.25, 0.5, 1, 2.5, 5, 10];

    private readonly Meter _meter = new(MeterName, typeof(ClusterMetrics).Assembly.GetName().Version?.ToString());
    private readonly Counter<long> _tiles;
    private readonly Counter<long> _workerTiles;
    private readonly Counter<long> _paths;
    private readonly Counter<long> _resolves;
    private readonly Histogram<double> _resolveSeconds;

    public ClusterMetrics()
    {
        _tiles = _meter.CreateCounter<long>("fiberworkers.tiles", "{tile}",
            "Tile attempts the coordinator finished, by outcome (merged, duplicate, failed, timeout, busy, lost, returned); rate(merged) is tiles per second.");
        _workerTiles = _meter.CreateCounter<long>("fiberworkers.worker.tiles", "{tile}",
            "Tiles a worker finished, by outcome (computed, returned: handed back unfinished or refused because the worker is stopping).");
        _paths = _meter.CreateCounter<long>("fiberworkers.paths", "{path}",
            "Homotopy paths tracked, by work: tile (accepted tile results, counted by the coordinator) or resolve (answers, counted by the worker).");
        _resolves = _meter.CreateCounter<long>("fiberworkers.resolves", "{resolve}",
            "Resolves a worker answered, by method: real-track (the fast path) or full (the fallback full solve).");
        _resolveSeconds = _meter.CreateHistogram<double>("fiberworkers.resolve.duration", "s",
            "Time a worker took to answer one resolve (shard load included when it was not cached), by method.",
            advice: new InstrumentAdvice<double> { HistogramBucketBoundaries = ResolveBuckets });
    }

    /// <summary>A tile attempt ended at the coordinator.</summary>
    public void TileAttempt(string outcome) => _tiles.Add(1, new KeyValuePair<string, object?>("outcome", outcome));

    /// <summary>A worker finished (or handed back) a tile.</summary>
    public void WorkerTile(string outcome) => _workerTiles.Add(1, new KeyValuePair<string, object?>("outcome", outcome));

    /// <summary>Paths tracked for an accepted tile result.</summary>
    public void TilePaths(long paths) => _paths.Add(paths, new KeyValuePair<string, object?>("work", "tile"));

    /// <summary>A resolve answered by <paramref name="method"/> ("real-track" or "full") in <paramref name="seconds"/>.</summary>
    public void Resolved(string method, double seconds, long paths)
    {
        var tag = new KeyValuePair<string, object?>("method", method);
        _resolves.Add(1, tag);
        _resolveSeconds.Record(seconds, tag);
        _paths.Add(paths, new KeyValuePair<string, object?>("work", "resolve"));
    }

    /// <summary>The coordinator's gauges: live workers, asks waiting per worker, tiles in flight per worker, tiles pending per running sweep.</summary>
    public void ObserveCoordinator(Func<int> liveWorkers, Func<IEnumerable<(string Worker, int Asks, int Tiles)>> perWorker, Func<IEnumerable<(long Sweep, long Pending)>> pending)
    {
        ArgumentNullException.ThrowIfNull(liveWorkers);
        ArgumentNullException.ThrowIfNull(perWorker);
        ArgumentNullException.ThrowIfNull(pending);
        _meter.CreateObservableGauge("fiberworkers.workers", liveWorkers, "{worker}",
            "Workers registered and live (not lost, not draining).");
        _meter.CreateObservableGauge("fiberworkers.ask.queue", () => perWorker().Select(w => new Measurement<int>(w.Asks, new KeyValuePair<string, object?>("worker", w.Worker))), "{ask}",
            "Asks the coordinator forwarded to a worker and not yet answered (refused beyond --ask-queue).");
        _meter.CreateObservableGauge("fiberworkers.tiles.in_flight", () => perWorker().Select(w => new Measurement<int>(w.Tiles, new KeyValuePair<string, object?>("worker", w.Worker))), "{tile}",
            "Tiles handed to a worker and not yet answered.");
        _meter.CreateObservableGauge("fiberworkers.sweep.pending", () => pending().Select(p => new Measurement<long>(p.Pending, new KeyValuePair<string, object?>("sweep", p.Sweep))), "{tile}",
            "Tiles planned but not yet merged, per sweep running on the coordinator.");
    }

    /// <summary>A worker's gauges: resolves waiting for a thread and tiles running.</summary>
    public void ObserveWorker(string workerId, Func<int> resolvesWaiting, Func<int> tilesRunning)
    {
        ArgumentNullException.ThrowIfNull(resolvesWaiting);
        ArgumentNullException.ThrowIfNull(tilesRunning);
        var tag = new KeyValuePair<string, object?>("worker", workerId);
        _meter.CreateObservableGauge("fiberworkers.resolve.queue", () => new Measurement<int>(resolvesWaiting(), tag), "{resolve}",
            "Resolves waiting for a worker thread (refused beyond --resolve-queue).");
        _meter.CreateObservableGauge("fiberworkers.worker.tiles_running", () => new Measurement<int>(tilesRunning(), tag), "{tile}",
            "Tiles a worker is computing.");
    }

    /// <summary>Seconds since <paramref name="start"/> (a <see cref="Stopwatch.GetTimestamp"/> value).</summary>
    public static double Since(long start) => Stopwatch.GetElapsedTime(start).TotalSeconds;

    public void Dispose() => _meter.Dispose();
}
