using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Contracts.V1;
using Grpc.Core;
using Grpc.Net.Client;
using Polly;
using Polly.CircuitBreaker;
using Polly.Timeout;
using Serilog;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>A tile result that fails the coordinator's checks (a worker answering garbage).</summary>
public sealed class InvalidTileException(string message) : Exception(message);

/// <summary>
/// One registered worker as the coordinator sees it: its channel, its tile slots, and its circuit breaker and
/// deadline (Polly). Counters are updated under the pool's lock or with interlocked operations.
/// </summary>
public sealed class WorkerLink : IDisposable
{
    private readonly CircuitBreakerStateProvider _circuit = new();
    private readonly CancellationTokenSource _gone = new();
    private int _tilesInFlight;
    private int _asksInFlight;
    private long _tilesDone;
    private long _tilesFailed;
    private long _openUntilTicks;
    private volatile bool _draining;

    internal WorkerLink(string id, Uri address, int threads, CoordinatorOptions options, Func<Uri, GrpcChannel> connect, ILogger log)
    {
        Id = id;
        Address = address;
        Threads = threads;
        Slots = threads + Math.Clamp(options.TileLookahead, 0, TileLookahead.Depth);
        Channel = connect(address);
        Client = new Worker.WorkerClient(Channel);
        LastSeen = DateTimeOffset.UtcNow;
        TilePipeline = new ResiliencePipelineBuilder()
            .AddCircuitBreaker(new CircuitBreakerStrategyOptions
            {
                FailureRatio = options.BreakFailureRatio,
                MinimumThroughput = options.BreakMinimumThroughput,
                SamplingDuration = options.BreakSampling,
                BreakDuration = options.BreakDuration,
                StateProvider = _circuit,
                OnOpened = args =>
                {
                    Volatile.Write(ref _openUntilTicks, (DateTimeOffset.UtcNow + args.BreakDuration).UtcTicks);
                    log.Warning("circuit of worker {WorkerId} opened for {Seconds:F1} s: too many failed tiles", id, args.BreakDuration.TotalSeconds);
                    return ValueTask.CompletedTask;
                },
                OnClosed = _ =>
                {
                    log.Information("circuit of worker {WorkerId} closed: it answers again", id);
                    return ValueTask.CompletedTask;
                },
                // A busy worker (ResourceExhausted) is not a failing one, nor is one handing tiles back because it
                // stops; cancellations are the caller's.
                ShouldHandle = new PredicateBuilder()
                    .Handle<RpcException>(e => e.StatusCode is not (StatusCode.Cancelled or StatusCode.ResourceExhausted) && !StoppingRefusal.Is(e))
                    .Handle<TimeoutRejectedException>()
                    .Handle<InvalidTileException>(),
            })
            .AddTimeout(options.TileDeadline)
            .Build();
    }

    public string Id { get; }

    public Uri Address { get; }

    public int Threads { get; }

    internal GrpcChannel Channel { get; }

    internal Worker.WorkerClient Client { get; }

    /// <summary>Circuit breaker (outer) and the tile deadline (inner): timeouts count as failures.</summary>
    internal ResiliencePipeline TilePipeline { get; }

    public DateTimeOffset LastSeen { get; internal set; }

    /// <summary>Cancelled when the worker is declared lost: its calls in flight end at once.</summary>
    public CancellationToken Gone => _gone.Token;

    public bool IsLost => _gone.IsCancellationRequested;

    /// <summary>True once the worker said it stops: it gets no new tiles or asks; calls in flight run on.</summary>
    public bool IsDraining => _draining;

    public CircuitState Circuit => _circuit.CircuitState;

    /// <summary>
    /// Can take a tile: not lost, a free slot, and a closed circuit — or one trial tile at a time once the circuit's
    /// break is over (the breaker itself moves to half-open only when a call arrives).
    /// </summary>
    public bool Available
    {
        get
        {
            if (IsLost || _draining || Volatile.Read(ref _tilesInFlight) >= Slots)
            {
                return false;
            }

            return Circuit switch
            {
                CircuitState.Closed => true,
                CircuitState.HalfOpen => TilesInFlight == 0,
                CircuitState.Open => TilesInFlight == 0 && DateTimeOffset.UtcNow.UtcTicks >= Volatile.Read(ref _openUntilTicks),
                _ => false,
            };
        }
    }

    public int TilesInFlight => Volatile.Read(ref _tilesInFlight);

    /// <summary>Tiles it may hold at once: one per tile thread plus <see cref="CoordinatorOptions.TileLookahead"/> waiting for a thread.</summary>
    public int Slots { get; }

    public int AsksInFlight => Volatile.Read(ref _asksInFlight);

    public long TilesDone => Interlocked.Read(ref _tilesDone);

    public long TilesFailed => Interlocked.Read(ref _tilesFailed);

    public string State => IsLost ? "lost" : _draining ? "draining" : Circuit is CircuitState.Open or CircuitState.Isolated or CircuitState.HalfOpen ? "open-circuit" : "live";

    internal bool TryTakeSlot()
    {
        while (true)
        {
            var current = Volatile.Read(ref _tilesInFlight);
            if (current >= Slots || IsLost || _draining)
            {
                return false;
            }

            if (Interlocked.CompareExchange(ref _tilesInFlight, current + 1, current) == current)
            {
                return true;
            }
        }
    }

    /// <summary>Gives back a slot that was taken but not used (nothing counted).</summary>
    internal void ReturnSlot() => Interlocked.Decrement(ref _tilesInFlight);

    internal void ReleaseSlot(bool succeeded)
    {
        Interlocked.Decrement(ref _tilesInFlight);
        Interlocked.Increment(ref succeeded ? ref _tilesDone : ref _tilesFailed);
    }

    /// <summary>Counts an ask; false (nothing counted) when <paramref name="limit"/> asks are already waiting.</summary>
    internal bool TryEnterAsk(int limit)
    {
        if (Interlocked.Increment(ref _asksInFlight) <= limit)
        {
            return true;
        }

        Interlocked.Decrement(ref _asksInFlight);
        return false;
    }

    internal void ExitAsk() => Interlocked.Decrement(ref _asksInFlight);

    internal void MarkLost() => _gone.Cancel();

    internal void MarkDraining() => _draining = true;

    public WorkerState ToMessage() => new()
    {
        WorkerId = Id,
        Address = Address.ToString().TrimEnd('/'),
        State = State,
        Threads = Threads,
        TilesInFlight = TilesInFlight,
        TilesDone = TilesDone,
        TilesFailed = TilesFailed,
    };

    public void Dispose()
    {
        _gone.Cancel();
        _gone.Dispose();
        Channel.Dispose();
    }
}

/// <summary>
/// The workers registered with the coordinator: registration, heartbeats, loss detection, and the choice of a worker
/// for the next tile. Thread-safe.
/// </summary>
public sealed class WorkerPool : IDisposable
{
    private readonly Lock _gate = new();
    private readonly Dictionary<string, WorkerLink> _workers = new(StringComparer.Ordinal);
    private readonly CoordinatorOptions _options;
    private readonly ILogger _log;
    private readonly Func<Uri, GrpcChannel> _connect;
    private readonly LinkedList<SlotWaiter> _waiters = new();
    private readonly Timer _recheck;

    public WorkerPool(CoordinatorOptions options, ILogger log, Func<Uri, GrpcChannel>? connect = null)
    {
        ArgumentNullException.ThrowIfNull(options);
        ArgumentNullException.ThrowIfNull(log);
        _options = options;
        _log = log;
        _connect = connect ?? (address => Security.ChannelSecurity.Open(address, options.Security.Outbound, options.MaxMessageBytes));

        // A circuit whose break is over makes its worker available again without any event to say so.
        _recheck = new Timer(_ => Pulse(), null, RecheckPeriod, RecheckPeriod);
    }

    /// <summary>How often waiting tiles look again for workers whose circuit's break ended.</summary>
    private static readonly TimeSpan RecheckPeriod = TimeSpan.FromMilliseconds(250);

    /// <summary>Registers (or re-registers) a worker; a new address under a known id replaces the old link.</summary>
    public void Register(string id, Uri address, int threads)
    {
        WorkerLink? replaced = null;
        lock (_gate)
        {
            if (_workers.TryGetValue(id, out var known))
            {
                if (known.Address == address && known.Threads == threads && !known.IsLost)
                {
                    known.LastSeen = DateTimeOffset.UtcNow;
                    return;
                }

                replaced = known;
            }

            _workers[id] = new WorkerLink(id, address, threads, _options, _connect, _log);
        }

        replaced?.MarkLost();
        replaced?.Dispose();
        _log.Information("worker {WorkerId} registered at {WorkerAddress} with {Threads} threads", id, address, threads);
        Pulse();
    }

    /// <summary>Records a heartbeat; false when the worker is unknown (it must register again).</summary>
    public bool Heartbeat(string id)
    {
        lock (_gate)
        {
            if (_workers.TryGetValue(id, out var link) && !link.IsLost)
            {
                link.LastSeen = DateTimeOffset.UtcNow;
                return true;
            }

            return false;
        }
    }

    /// <summary>Declares workers silent for too long lost: their calls in flight are cancelled and their tiles retried.</summary>
    public void SweepLost()
    {
        if (HoldLosses)
        {
            return;
        }

        var limit = _options.Heartbeat * _options.MissedHeartbeats;
        var now = DateTimeOffset.UtcNow;
        List<WorkerLink> lost;
        lock (_gate)
        {
            lost = [.. _workers.Values.Where(w => now - w.LastSeen > limit)];
            foreach (var link in lost)
            {
                _workers.Remove(link.Id);
            }
        }

        foreach (var link in lost)
        {
            _log.Warning("worker {WorkerId} at {WorkerAddress} lost: no heartbeat for {Seconds:F1} s; its {TilesInFlight} tiles in flight go to other workers",
                link.Id, link.Address, (now - link.LastSeen).TotalSeconds, link.TilesInFlight);
            link.MarkLost();
            link.Dispose();
        }

        if (lost.Count > 0)
        {
            Pulse();
        }
    }

    /// <summary>
    /// A worker reported that it stops: while it drains (<paramref name="final"/> false) it keeps its calls in flight
    /// but gets no new tiles or asks and is no longer listed as live; once it is gone (<paramref name="final"/> true)
    /// it is removed. False when the worker was unknown.
    /// </summary>
    public bool Deregister(string id, bool final)
    {
        WorkerLink? link;
        lock (_gate)
        {
            _workers.TryGetValue(id, out link);
        }

        if (link is null)
        {
            return false;
        }

        if (final && link.TilesInFlight == 0 && link.AsksInFlight == 0)
        {
            if (Remove(id))
            {
                _log.Information("worker {WorkerId} at {WorkerAddress} stopped and deregistered", id, link.Address);
            }
        }
        else if (final)
        {
            // Its last answers may still be on their way here: cancelling them now would turn a returned tile into a
            // lost one. The link stays draining and goes with its heartbeats.
            link.MarkDraining();
            _log.Information("worker {WorkerId} at {WorkerAddress} stopped; {TilesInFlight} calls to it still end here first", id, link.Address, link.TilesInFlight + link.AsksInFlight);
        }
        else
        {
            link.MarkDraining();
            _log.Information("worker {WorkerId} at {WorkerAddress} is stopping: no new tiles or asks; its {TilesInFlight} tiles in flight finish or come back",
                id, link.Address, link.TilesInFlight);
            Pulse();
        }

        return true;
    }

    /// <summary>Removes a worker at once (it reported that it stopped); false when it was not registered.</summary>
    public bool Remove(string id)
    {
        WorkerLink? link;
        lock (_gate)
        {
            if (!_workers.Remove(id, out link))
            {
                return false;
            }
        }

        link.MarkLost();
        link.Dispose();
        Pulse();
        return true;
    }

    /// <summary>Live workers in id order (not lost, not draining).</summary>
    public IReadOnlyList<WorkerLink> Live()
    {
        lock (_gate)
        {
            return [.. _workers.Values.Where(w => !w.IsLost && !w.IsDraining).OrderBy(w => w.Id, StringComparer.Ordinal)];
        }
    }

    /// <summary>Every registered worker, draining ones included, in id order.</summary>
    public IReadOnlyList<WorkerLink> All()
    {
        lock (_gate)
        {
            return [.. _workers.Values.OrderBy(w => w.Id, StringComparer.Ordinal)];
        }
    }

    /// <summary>Stops declaring silent workers lost (the coordinator is stopping and may no longer hear heartbeats).</summary>
    public bool HoldLosses { get; set; }

    /// <summary>
    /// Waits for a worker with a free slot and takes the slot: the one with the most free slots, preferring workers
    /// not in <paramref name="avoid"/> (those that just failed this tile) while any other is available. Waiting tiles
    /// are served first come, first served: a freed slot goes to the one that has waited longest, and only it is
    /// woken. (Waking every waiting tile at each freed slot, as this did before, cost the coordinator O(tiles²)
    /// wake-ups and timers per sweep: 1.9 ms of CPU a tile over a 1,600-tile replay.)
    /// </summary>
    public async Task<WorkerLink> AcquireAsync(IReadOnlySet<string> avoid, CancellationToken cancellation)
    {
        ArgumentNullException.ThrowIfNull(avoid);
        SlotWaiter waiter;
        lock (_gate)
        {
            if (_waiters.Count == 0 && TryTake(avoid) is { } free)
            {
                return free;
            }

            waiter = new SlotWaiter(avoid);
            waiter.Node = _waiters.AddLast(waiter);
        }

        WorkerLink link;
        using (cancellation.Register(() => Withdraw(waiter, cancellation)))
        {
            link = await waiter.Granted.Task.ConfigureAwait(false);
        }

        if (cancellation.IsCancellationRequested)
        {
            // Granted and cancelled at once: the slot goes back, uncounted, to the next waiting tile.
            link.ReturnSlot();
            Pulse();
            throw new OperationCanceledException(cancellation);
        }

        return link;
    }

    /// <summary>A tile waiting for a slot (its node is null once granted or withdrawn, always under the lock).</summary>
    private sealed class SlotWaiter(IReadOnlySet<string> avoid)
    {
        public IReadOnlySet<string> Avoid { get; } = avoid;

        public TaskCompletionSource<WorkerLink> Granted { get; } = new(TaskCreationOptions.RunContinuationsAsynchronously);

        public LinkedListNode<SlotWaiter>? Node { get; set; }
    }

    private void Withdraw(SlotWaiter waiter, CancellationToken cancellation)
    {
        lock (_gate)
        {
            if (waiter.Node is null)
            {
                return;
            }

            _waiters.Remove(waiter.Node);
            waiter.Node = null;
        }

        waiter.Granted.TrySetCanceled(cancellation);
    }

    /// <summary>Under the lock: takes a slot of the best available worker for a tile avoiding <paramref name="avoid"/>.</summary>
    private WorkerLink? TryTake(IReadOnlySet<string> avoid)
    {
        WorkerLink? best = null;
        var bestAvoided = true;
        foreach (var link in _workers.Values)
        {
            if (!link.Available)
            {
                continue;
            }

            var avoided = avoid.Contains(link.Id);
            var free = link.Slots - link.TilesInFlight;
            var better = best is null
                || (bestAvoided && !avoided)
                || (bestAvoided == avoided && (free > best.Slots - best.TilesInFlight
                    || (free == best.Slots - best.TilesInFlight && string.CompareOrdinal(link.Id, best.Id) < 0)));
            if (better)
            {
                (best, bestAvoided) = (link, avoided);
            }
        }

        return best is not null && best.TryTakeSlot() ? best : null;
    }

    /// <summary>Frees a slot taken by <see cref="AcquireAsync"/>.</summary>
    public void Release(WorkerLink link, bool succeeded)
    {
        ArgumentNullException.ThrowIfNull(link);
        link.ReleaseSlot(succeeded);
        Pulse();
    }

    public void Dispose()
    {
        _recheck.Dispose();
        lock (_gate)
        {
            foreach (var link in _workers.Values)
            {
                link.Dispose();
            }

            _workers.Clear();
        }
    }

    /// <summary>Something changed (a slot freed, a worker joined or left): hands free slots to the longest-waiting tiles.</summary>
    private void Pulse()
    {
        List<(SlotWaiter Waiter, WorkerLink Link)>? granted = null;
        lock (_gate)
        {
            while (_waiters.First is { } node && TryTake(node.Value.Avoid) is { } link)
            {
                _waiters.RemoveFirst();
                node.Value.Node = null;
                (granted ??= []).Add((node.Value, link));
            }
        }

        // Outside the lock: the continuations run on the thread pool (RunContinuationsAsynchronously) anyway.
        foreach (var (waiter, link) in granted ?? [])
        {
            waiter.Granted.TrySetResult(link);
        }
    }
}
