using System.Collections.Concurrent;
using System.Diagnostics;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Contracts.V1;
using Grpc.Core;
using Polly;
using Polly.CircuitBreaker;
using Polly.Retry;
using Polly.Timeout;
using Serilog;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>
/// Hands tiles to workers: each tile waits for a free slot on a live worker, runs under that worker's circuit breaker
/// and deadline, is checked, and on any failure (error, garbage, timeout, lost worker) is retried with backoff on
/// another worker (Polly retry). Every attempt is recorded in the ledger and logged. A tile a stopping worker refuses
/// or hands back (<see cref="StoppingRefusal"/>) is recorded as <c>returned</c> and goes to another worker at once,
/// counting neither against that worker's circuit nor against the tile's attempt budget.
/// </summary>
public sealed class TileDispatcher
{
    private readonly WorkerPool _pool;
    private readonly ISweepLedger _ledger;
    private readonly ILogger _log;
    private readonly ResiliencePipeline _retry;
    private readonly ConcurrentDictionary<(long Sweep, string Tile), Accepted> _accepted = new();
    private readonly CancellationTokenSource _draining = new();
    private readonly int _maxFailures;
    private readonly ClusterMetrics? _metrics;

    public TileDispatcher(WorkerPool pool, ISweepLedger ledger, CoordinatorOptions options, ILogger log, ClusterMetrics? metrics = null)
    {
        ArgumentNullException.ThrowIfNull(pool);
        ArgumentNullException.ThrowIfNull(ledger);
        ArgumentNullException.ThrowIfNull(options);
        ArgumentNullException.ThrowIfNull(log);
        _pool = pool;
        _ledger = ledger;
        _log = log;
        _metrics = metrics;
        _maxFailures = Math.Max(1, options.MaxTileAttempts);

        // The attempt budget is counted per tile in ComputeAsync (returned tiles do not count), so the strategy itself
        // retries until an attempt says it was the last.
        _retry = new ResiliencePipelineBuilder()
            .AddRetry(new RetryStrategyOptions
            {
                MaxRetryAttempts = int.MaxValue,
                BackoffType = DelayBackoffType.Exponential,
                UseJitter = true,
                Delay = options.RetryDelay,
                MaxDelay = options.RetryMaxDelay,
                ShouldHandle = new PredicateBuilder().Handle<AttemptFailedException>(e => !e.Last),
                DelayGenerator = args => ValueTask.FromResult(args.Outcome.Exception is AttemptFailedException { Returned: true } ? TimeSpan.Zero : (TimeSpan?)null),
            })
            .Build();
    }

    /// <summary>True once <see cref="BeginDraining"/> was called.</summary>
    public bool IsDraining => _draining.IsCancellationRequested;

    /// <summary>
    /// The coordinator stops: no tile gets a new attempt from now on (those waiting for a worker end with an
    /// <see cref="OperationCanceledException"/>), while attempts in flight run on and their results are merged.
    /// </summary>
    public void BeginDraining() => _draining.Cancel();

    /// <summary>Tiles answered and checked, not yet merged (their attempt is recorded at the merge).</summary>
    private sealed record Accepted(int Attempt, string Worker, DateTimeOffset Started, double Seconds);

    /// <summary>
    /// A failed attempt, already recorded; the retry strategy handles only these, and not the <paramref name="last"/>
    /// one. <paramref name="returned"/>: a stopping worker gave the tile back (not a failure of the tile).
    /// </summary>
    private sealed class AttemptFailedException(string message, Exception inner, bool returned, bool last) : Exception(message, inner)
    {
        public bool Returned { get; } = returned;

        public bool Last { get; } = last;
    }

    /// <summary>The <see cref="RemoteTileSource"/> of a cluster sweep.</summary>
    public async Task<(TileResult Result, long PathsTracked)> ComputeAsync(SweepContext context, long sweepId, TileKey key, CancellationToken cancellation)
    {
        ArgumentNullException.ThrowIfNull(context);
        var settings = Conversions.ToSettings(context.Options);
        var tile = key.ToString();
        var failedOn = new HashSet<string>(StringComparer.Ordinal);
        var attempt = 0;
        var failures = 0;
        var returns = 0;
        try
        {
            return await _retry.ExecuteAsync(
                async token =>
                {
                    if (_draining.IsCancellationRequested)
                    {
                        throw new OperationCanceledException($"tile {tile}: the coordinator is stopping", _draining.Token);
                    }

                    attempt++;
                    WorkerLink link;
                    using (var waiting = CancellationTokenSource.CreateLinkedTokenSource(token, _draining.Token))
                    {
                        link = await _pool.AcquireAsync(failedOn, waiting.Token).ConfigureAwait(false);
                    }

                    var started = DateTimeOffset.UtcNow;
                    var clock = Stopwatch.StartNew();
                    var succeeded = false;
                    try
                    {
                        using var linked = CancellationTokenSource.CreateLinkedTokenSource(token, link.Gone);
                        var task = new TileTask { SweepId = sweepId, FamilyHash = context.Family.ContentHash, Settings = settings, TileKey = tile, Attempt = attempt };
                        var outcome = await link.TilePipeline.ExecuteAsync(
                            async t =>
                            {
                                TileOutcome reply;
                                try
                                {
                                    reply = await link.Client.RunTileAsync(task, cancellationToken: t).ConfigureAwait(false);
                                }
                                catch (RpcException e) when (e.StatusCode == StatusCode.Cancelled && t.IsCancellationRequested)
                                {
                                    // The deadline (or the worker's loss) cancelled the call: report it as a cancellation,
                                    // which the timeout strategy turns into a timeout when its own clock ran out.
                                    throw new OperationCanceledException(e.Message, e, t);
                                }

                                TileChecks.Check(reply.Result, context, key, link.Id);
                                return reply;
                            },
                            linked.Token).ConfigureAwait(false);
                        succeeded = true;
                        _accepted[(sweepId, tile)] = new Accepted(attempt, link.Id, started, clock.Elapsed.TotalSeconds);
                        _metrics?.TilePaths(outcome.PathsTracked);
                        _log.Information(
                            "tile {TileKey} of sweep {SweepId}: attempt {Attempt} on worker {WorkerId} completed in {Seconds:F3} s ({Samples} samples, {Paths} paths)",
                            tile, sweepId, attempt, link.Id, clock.Elapsed.TotalSeconds, outcome.Result.Samples.Count, outcome.PathsTracked);
                        return (outcome.Result, outcome.PathsTracked);
                    }
                    catch (Exception e) when (!token.IsCancellationRequested)
                    {
                        // A stopping worker's refusal, or any end of a call to a worker that said it stops (its last
                        // answer may race its final deregistration): the tile comes back, nothing failed.
                        var returned = (e is RpcException rpc && StoppingRefusal.Is(rpc)) || link.IsDraining;
                        var kind = returned ? "returned" : link.IsLost ? "lost" : e is TimeoutRejectedException ? "timeout"
                            : e is RpcException { StatusCode: StatusCode.ResourceExhausted } ? "busy" : "failed";
                        var detail = Describe(e, link);
                        failedOn.Add(link.Id);
                        _ledger.RecordAttempt(new TileAttempt(sweepId, tile, attempt, link.Id, started, clock.Elapsed.TotalSeconds, kind, detail));
                        _metrics?.TileAttempt(kind);

                        // Hand-backs are bounded too (every worker stopping at once must not loop for ever), but far above
                        // anything a rolling restart produces.
                        var last = returned ? ++returns >= 16 * _maxFailures : ++failures >= _maxFailures;
                        if (returned)
                        {
                            _log.Information(
                                "tile {TileKey} of sweep {SweepId}: attempt {Attempt} returned by worker {WorkerId} after {Seconds:F3} s ({Detail}); it goes to another worker",
                                tile, sweepId, attempt, link.Id, clock.Elapsed.TotalSeconds, detail);
                        }
                        else
                        {
                            _log.Warning(
                                "tile {TileKey} of sweep {SweepId}: attempt {Attempt} on worker {WorkerId} {Outcome} after {Seconds:F3} s: {Detail}",
                                tile, sweepId, attempt, link.Id, kind, clock.Elapsed.TotalSeconds, detail);
                        }

                        throw new AttemptFailedException($"attempt {attempt} at tile {tile} on worker {link.Id} {kind}: {detail}", e, returned, last);
                    }
                    finally
                    {
                        _pool.Release(link, succeeded);
                    }
                },
                cancellation).ConfigureAwait(false);
        }
        catch (AttemptFailedException e)
        {
            throw new InvalidOperationException($"tile {tile} failed {failures} attempts ({attempt} in all, {returns} returned by stopping workers); the last: {e.Message}", e);
        }
    }

    /// <summary>Records the accepted attempt of a tile once the sweep kept (or ignored) its result; logs the merge.</summary>
    public void OnMerged(TileMerge merge)
    {
        ArgumentNullException.ThrowIfNull(merge);
        var outcome = merge.Merged ? "merged" : "duplicate";
        if (_accepted.TryRemove((merge.SweepId, merge.TileKey), out var accepted))
        {
            _ledger.RecordAttempt(new TileAttempt(merge.SweepId, merge.TileKey, accepted.Attempt, accepted.Worker, accepted.Started, accepted.Seconds, outcome, merge.TileHash));
        }

        _metrics?.TileAttempt(outcome);

        _log.Information("tile {TileKey} of sweep {SweepId} {MergeOutcome} as {TileHash}", merge.TileKey, merge.SweepId, outcome, merge.TileHash);
    }

    private static string Describe(Exception e, WorkerLink link) => e switch
    {
        RpcException refusal when StoppingRefusal.Is(refusal) => $"{refusal.StatusCode}: {refusal.Status.Detail}",
        _ when link.IsDraining => "the worker stopped (it had deregistered) before answering",
        _ when link.IsLost => "the worker was lost (no heartbeat or it stopped)",
        TimeoutRejectedException => "no answer before the tile deadline",
        BrokenCircuitException => "the worker's circuit is open",
        InvalidTileException invalid => invalid.Message,
        RpcException rpc => $"{rpc.StatusCode}: {rpc.Status.Detail}",
        _ => e.Message,
    };
}
