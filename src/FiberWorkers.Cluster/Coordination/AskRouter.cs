using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Routing;
using FiberWorkers.Contracts.V1;
using Grpc.Core;
using Serilog;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>
/// Forwards asks to workers: the point's level-0 tile is hashed over the live workers (rendezvous), so each tile's
/// shard stays warm on one worker; when that worker fails the next in hash order answers. A worker with too many asks
/// waiting gets no more: the ask is refused with ResourceExhausted at once instead of queueing without limit.
/// </summary>
public sealed class AskRouter
{
    private readonly WorkerPool _pool;
    private readonly AtlasCatalog _catalog;
    private readonly CoordinatorOptions _options;
    private readonly ILogger _log;
    private volatile bool _stopping;

    public AskRouter(WorkerPool pool, AtlasCatalog catalog, CoordinatorOptions options, ILogger log)
    {
        _pool = pool;
        _catalog = catalog;
        _options = options;
        _log = log;
    }

    /// <summary>Refuses new asks from now on (the coordinator is stopping); asks in flight are answered.</summary>
    public void BeginStopping() => _stopping = true;

    public async Task<AskReply> AskAsync(AskRequest request, CancellationToken cancellation)
    {
        ArgumentNullException.ThrowIfNull(request);
        if (_stopping)
        {
            throw StoppingRefusal.Create("coordinator", "the coordinator is stopping: ask again once it is back, or ask a worker directly");
        }

        RequestChecks.Id(request.AtlasId, "atlas_id");
        RequestChecks.Id(request.RequestId, "request_id", required: false);
        RequestChecks.Version(request.Version, "version");

        // Overload is refused before any store read, routing or hashing: when every live worker's queue is full, none
        // could take the ask, and the refusal must not wait behind work it is there to shed.
        var live = _pool.Live();
        if (live.Count > 0 && live.All(w => w.AsksInFlight >= _options.AskQueuePerWorker))
        {
            throw new RpcException(new Status(
                StatusCode.ResourceExhausted,
                $"every live worker already has {_options.AskQueuePerWorker} asks waiting (the per-worker queue limit); retry later"));
        }

        var view = _catalog.View(request.AtlasId, request.Version);
        var point = RequestChecks.Point(request.Point, view.Family.Parameters.Count, "point");
        var tile = TileKey.Containing(point, view.Family.Parameters, view.Divisions).ToString();
        var order = Rendezvous.Order(tile, live, w => w.Id);
        if (order.Count == 0)
        {
            throw new RpcException(new Status(StatusCode.Unavailable, "no live workers: start one with 'fiber serve worker --coordinator ...'"));
        }

        var forwarded = new ResolveRequest { Ask = request, TileKey = tile, Version = view.Version.Version };
        var failures = new List<string>();
        foreach (var worker in order)
        {
            if (!worker.TryEnterAsk(_options.AskQueuePerWorker))
            {
                throw new RpcException(new Status(
                    StatusCode.ResourceExhausted,
                    $"worker {worker.Id} already has {_options.AskQueuePerWorker} asks waiting (the per-worker queue limit); retry later"));
            }

            try
            {
                using var linked = CancellationTokenSource.CreateLinkedTokenSource(cancellation, worker.Gone);
                return await worker.Client.ResolveAsync(forwarded, deadline: DateTime.UtcNow + _options.AskDeadline, cancellationToken: linked.Token).ConfigureAwait(false);
            }
            catch (RpcException e) when (Retriable(e.StatusCode) && !cancellation.IsCancellationRequested)
            {
                failures.Add($"{worker.Id}: {e.StatusCode}");
                _log.Warning("ask for tile {TileKey} failed on worker {WorkerId} ({Status}: {Detail}); trying the next worker", tile, worker.Id, e.StatusCode, e.Status.Detail);
            }
            catch (OperationCanceledException) when (!cancellation.IsCancellationRequested)
            {
                failures.Add($"{worker.Id}: lost");
            }
            finally
            {
                worker.ExitAsk();
            }
        }

        throw new RpcException(new Status(StatusCode.Unavailable, $"every live worker failed the ask ({string.Join(", ", failures)})"));
    }

    /// <summary>Failures another worker may not share; refusals (overload, bad input) are passed on as they are.</summary>
    private static bool Retriable(StatusCode code) => code is StatusCode.Unavailable or StatusCode.DeadlineExceeded or StatusCode.Internal
        or StatusCode.Unknown or StatusCode.Cancelled or StatusCode.DataLoss;
}
