using System.Collections.Concurrent;
using System.Diagnostics;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Cluster.Contracts;
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
/// another worker (Polly retry). Every attempt is recorded in the ledger and logged.
/// </summary>
public sealed class TileDispatcher
{
    private readonly WorkerPool _pool;
    private readonly ISweepLedger _ledger;
    private readonly ILogger _log;
    private readonly ResiliencePipeline _retry;
    private readonly ConcurrentDictionary<(long Sweep, string Tile), Accepted> _accepted = new();

    public TileDispatcher(WorkerPool pool, ISweepLedger ledger, CoordinatorOptions options, ILogger log)
    {
        ArgumentNullException.ThrowIfNull(pool);
        ArgumentNullException.ThrowIfNull(ledger);
        ArgumentNullException.ThrowIfNull(options);
        ArgumentNullException.ThrowIfNull(log);
        _pool = pool;
        _ledger = ledger;
        _log = log;
        _retry = new ResiliencePipelineBuilder()
            .AddRetry(new RetryStrategyOptions
            {
                MaxRetryAttempts = Math.Max(0, options.MaxTileAttempts - 1),
                BackoffType = DelayBackoffType.Exponential,
                UseJitter = true,
                Delay = options.RetryDelay,
                MaxDelay = options.RetryMaxDelay,
                ShouldHandle = new PredicateBuilder().Handle<AttemptFailedException>(),
            })
            .Build();
    }

    /// <summary>Tiles answered and checked, not yet merged (their attempt is recorded at the merge).</summary>
    private sealed record Accepted(int Attempt, string Worker, DateTimeOffset Started, double Seconds);

    /// <summary>A failed attempt, already recorded; the retry strategy handles only these.</summary>
    private sealed class AttemptFailedException(string message, Exception inner) : Exception(message, inner);

    /// <summary>The <see cref="RemoteTileSource"/> of a cluster sweep.</summary>
    public async Task<(TileResult Result, long PathsTracked)> ComputeAsync(SweepContext context, long sweepId, TileKey key, CancellationToken cancellation)
    {
        ArgumentNullException.ThrowIfNull(context);
        var settings = Conversions.ToSettings(context.Options);
        var tile = key.ToString();
        var failedOn = new HashSet<string>(StringComparer.Ordinal);
        var attempt = 0;
        try
        {
            return await _retry.ExecuteAsync(
                async token =>
                {
                    attempt++;
                    var link = await _pool.AcquireAsync(failedOn, token).ConfigureAwait(false);
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
                        _log.Information(
                            "tile {TileKey} of sweep {SweepId}: attempt {Attempt} on worker {WorkerId} completed in {Seconds:F3} s ({Samples} samples, {Paths} paths)",
                            tile, sweepId, attempt, link.Id, clock.Elapsed.TotalSeconds, outcome.Result.Samples.Count, outcome.PathsTracked);
                        return (outcome.Result, outcome.PathsTracked);
                    }
                    catch (Exception e) when (!token.IsCancellationRequested)
                    {
                        var kind = link.IsLost ? "lost" : e is TimeoutRejectedException ? "timeout"
                            : e is RpcException { StatusCode: StatusCode.ResourceExhausted } ? "busy" : "failed";
                        var detail = Describe(e, link);
                        failedOn.Add(link.Id);
                        _ledger.RecordAttempt(new TileAttempt(sweepId, tile, attempt, link.Id, started, clock.Elapsed.TotalSeconds, kind, detail));
                        _log.Warning(
                            "tile {TileKey} of sweep {SweepId}: attempt {Attempt} on worker {WorkerId} {Outcome} after {Seconds:F3} s: {Detail}",
                            tile, sweepId, attempt, link.Id, kind, clock.Elapsed.TotalSeconds, detail);
                        throw new AttemptFailedException($"attempt {attempt} at tile {tile} on worker {link.Id} {kind}: {detail}", e);
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
            throw new InvalidOperationException($"tile {tile} failed {attempt} attempts; the last: {e.Message}", e);
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

        _log.Information("tile {TileKey} of sweep {SweepId} {MergeOutcome} as {TileHash}", merge.TileKey, merge.SweepId, outcome, merge.TileHash);
    }

    private static string Describe(Exception e, WorkerLink link) => e switch
    {
        _ when link.IsLost => "the worker was lost (no heartbeat or it stopped)",
        TimeoutRejectedException => "no answer before the tile deadline",
        BrokenCircuitException => "the worker's circuit is open",
        InvalidTileException invalid => invalid.Message,
        RpcException rpc => $"{rpc.StatusCode}: {rpc.Status.Detail}",
        _ => e.Message,
    };
}
