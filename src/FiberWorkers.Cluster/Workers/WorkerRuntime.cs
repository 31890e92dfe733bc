using System.Collections.Concurrent;
using System.Diagnostics;
using System.Globalization;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Resolve;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;
using Google.Protobuf;
using Grpc.Core;
using Serilog;

namespace FiberWorkers.Cluster.Workers;

/// <summary>
/// What a worker does, behind its gRPC service: computes tiles with the sweep code (setups fetched from the
/// coordinator and cached) and answers resolves from tile shards (fetched and cached, least recently used dropped).
/// Stateless apart from caches. Tiles run on long-lived tile threads (<see cref="TileThreads"/>), so heartbeats and
/// resolves keep flowing while all tile threads are busy; up to <see cref="TileLookahead.Depth"/> more tiles are
/// taken and wait for a thread.
/// </summary>
public sealed class WorkerRuntime : IDisposable
{
    private readonly WorkerOptions _options;
    private readonly Coordinator.CoordinatorClient _coordinator;
    private readonly ILogger _log;
    private readonly SemaphoreSlim _tileSlots;
    private readonly SemaphoreSlim _tileAdmission;
    private readonly CancellationTokenSource _stopSignal = new();
    private readonly SemaphoreSlim _resolveSlots;
    private readonly BoundedCache<string, SweepContext> _setups;
    private readonly BoundedCache<(string Atlas, int Version, string Tile, bool Verify), Resolver> _shards;
    private readonly ConcurrentDictionary<string, FamilyDefinition> _families = new(StringComparer.Ordinal);
    private readonly CancellationTokenSource _handBack = new();
    private readonly ClusterMetrics? _metrics;
    private readonly TileThreads _tileThreads;
    private int _tilesRunning;
    private int _resolvesWaiting;
    private int _stopping;

    public WorkerRuntime(WorkerOptions options, Coordinator.CoordinatorClient coordinator, ILogger log, ClusterMetrics? metrics = null)
    {
        ArgumentNullException.ThrowIfNull(options);
        ArgumentNullException.ThrowIfNull(coordinator);
        ArgumentNullException.ThrowIfNull(log);
        _options = options;
        _coordinator = coordinator;
        _log = log;
        _metrics = metrics;
        _tileSlots = new SemaphoreSlim(options.Threads, options.Threads);
        _tileAdmission = new SemaphoreSlim(options.Threads + TileLookahead.Depth, options.Threads + TileLookahead.Depth);
        _resolveSlots = new SemaphoreSlim(options.Threads, options.Threads);
        _setups = new BoundedCache<string, SweepContext>(options.SetupCache);
        _shards = new BoundedCache<(string, int, string, bool), Resolver>(options.ShardCache);
        _tileThreads = new TileThreads(options.Threads, "fiber-tile");
    }

    public string Id => _options.Id;

    public int TilesRunning => Volatile.Read(ref _tilesRunning);

    public int ResolvesWaiting => Volatile.Read(ref _resolvesWaiting);

    /// <summary>True once the worker began to stop.</summary>
    public bool IsStopping => Volatile.Read(ref _stopping) != 0;

    /// <summary>
    /// How long after the stop signal tiles still running are handed back unfinished: the drain timeout less a margin
    /// (a quarter of it, at most 5 s) for the tile to notice between two lines and for the refusal to reach the
    /// coordinator before the host closes its connections.
    /// </summary>
    public TimeSpan HandBackAfter => _options.DrainTimeout - TimeSpan.FromTicks(Math.Min(_options.DrainTimeout.Ticks / 4, TimeSpan.FromSeconds(5).Ticks));

    /// <summary>
    /// Refuses new tiles from now on (Unavailable with the stopping trailer, so the coordinator gives them to another
    /// worker without holding it against this one), and arms the hand-back: tiles still running after
    /// <see cref="HandBackAfter"/> are cancelled and answered the same way. Only the first call counts.
    /// </summary>
    public void BeginStopping()
    {
        if (Interlocked.Exchange(ref _stopping, 1) == 0)
        {
            _stopSignal.Cancel();
            _handBack.CancelAfter(HandBackAfter);
        }
    }

    /// <summary>Ends the tile threads once the tiles given to them are done (after the host stopped).</summary>
    public void Dispose() => _tileThreads.Dispose();

    public async Task<TileOutcome> RunTileAsync(TileTask task, CancellationToken cancellation)
    {
        ArgumentNullException.ThrowIfNull(task);
        var key = RequestChecks.RunTile(task, _options.Limits);
        if (IsStopping)
        {
            _metrics?.WorkerTile("returned");
            throw StoppingRefusal.Create("worker", $"worker {Id} is stopping: tile {key} not started; give it to another worker");
        }

        if (!await _tileAdmission.WaitAsync(0, cancellation).ConfigureAwait(false))
        {
            throw new RpcException(new Status(StatusCode.ResourceExhausted,
                $"worker {Id}: all {_options.Threads} tile threads are busy and {TileLookahead.Depth} more tiles wait"));
        }

        try
        {
            // A tile beyond the threads waits here; one still waiting when the worker begins to stop goes back.
            using var waiting = CancellationTokenSource.CreateLinkedTokenSource(cancellation, _stopSignal.Token);
            try
            {
                await _tileSlots.WaitAsync(waiting.Token).ConfigureAwait(false);
            }
            catch (OperationCanceledException) when (IsStopping && !cancellation.IsCancellationRequested)
            {
                _metrics?.WorkerTile("returned");
                throw StoppingRefusal.Create("worker", $"worker {Id} is stopping: tile {key} not started; give it to another worker");
            }

            try
            {
                return await ComputeTileAsync(task, key, cancellation).ConfigureAwait(false);
            }
            finally
            {
                _tileSlots.Release();
            }
        }
        finally
        {
            _tileAdmission.Release();
        }
    }

    /// <summary>Computes a tile on one of the tile threads, once it holds a tile slot.</summary>
    private async Task<TileOutcome> ComputeTileAsync(TileTask task, TileKey key, CancellationToken cancellation)
    {
        Interlocked.Increment(ref _tilesRunning);
        var clock = Stopwatch.StartNew();
        using var work = CancellationTokenSource.CreateLinkedTokenSource(cancellation, _handBack.Token);
        try
        {
            var context = await _setups.GetAsync(SetupKey(task), _ => LoadSetupAsync(task, cancellation)).ConfigureAwait(false);
            RequestChecks.StartFiberPaths(context.FamilyStart.RootCount, "family", _options.Limits, $"tile {key}");
            RequestChecks.StartFiberPaths(context.FoldStart.RootCount, "folds", _options.Limits, $"tile {key}");
            RequestChecks.StartFiberPaths(context.PassageStart.RootCount, "passages", _options.Limits, $"tile {key}");
            if (!key.FitsIn(context.Options.Divisions))
            {
                throw RequestChecks.Invalid("tile_key", $"{key} lies outside the {string.Join('x', context.Options.Divisions)} grid");
            }

            await MisbehaveAsync(work.Token).ConfigureAwait(false);
            clock.Restart();
            var (result, paths) = await _tileThreads.RunAsync(() => TileComputer.Compute(context, key, work.Token), work.Token).ConfigureAwait(false);
            if (_options.Fault == "garbage")
            {
                result = result.Clone();
                result.TileKey = "L0:" + string.Join(',', key.Coordinates.Select(c => c + 1));
            }

            _log.Information("tile {TileKey} of sweep {SweepId} (attempt {Attempt}) computed in {Seconds:F3} s", task.TileKey, task.SweepId, task.Attempt, clock.Elapsed.TotalSeconds);
            _metrics?.WorkerTile("computed");
            return new TileOutcome { Result = result, PathsTracked = paths, Seconds = clock.Elapsed.TotalSeconds, WorkerId = Id };
        }
        catch (OperationCanceledException) when (_handBack.IsCancellationRequested && !cancellation.IsCancellationRequested)
        {
            // The drain is running out: answer now, while the connection is still open, so the coordinator re-runs the
            // tile elsewhere at once instead of waiting for a broken call.
            _log.Warning("tile {TileKey} of sweep {SweepId} (attempt {Attempt}) handed back unfinished after {Seconds:F3} s: worker {WorkerId} is stopping",
                task.TileKey, task.SweepId, task.Attempt, clock.Elapsed.TotalSeconds, Id);
            _metrics?.WorkerTile("returned");
            throw StoppingRefusal.Create("worker", $"worker {Id} is stopping: tile {key} handed back unfinished; give it to another worker");
        }
        finally
        {
            Interlocked.Decrement(ref _tilesRunning);
        }
    }

    public async Task<AskReply> ResolveAsync(ResolveRequest request, CancellationToken cancellation)
    {
        ArgumentNullException.ThrowIfNull(request);
        var tile = RequestChecks.Resolve(request, _options.Limits);
        var ask = request.Ask;

        if (Interlocked.Increment(ref _resolvesWaiting) > _options.ResolveQueue)
        {
            Interlocked.Decrement(ref _resolvesWaiting);
            throw new RpcException(new Status(StatusCode.ResourceExhausted, $"worker {Id}: {_options.ResolveQueue} resolves already waiting (the queue limit); retry later"));
        }

        var entered = false;
        var arrived = Stopwatch.GetTimestamp();
        try
        {
            await _resolveSlots.WaitAsync(cancellation).ConfigureAwait(false);
            entered = true;
            Interlocked.Decrement(ref _resolvesWaiting);
            var resolver = await _shards.GetAsync((ask.AtlasId, request.Version, tile.ToString(), ask.Verify), k => LoadShardAsync(k.Atlas, k.Version, k.Tile, k.Verify, cancellation)).ConfigureAwait(false);
            var point = RequestChecks.Point(ask.Point, resolver.Samples.Dimension, "ask.point");
            var answer = resolver.Ask(point);
            var reply = Conversions.ToReply(answer, ask.RequestId, ask.AtlasId, Id, tile.ToString());
            _metrics?.Resolved(reply.Method, ClusterMetrics.Since(arrived), reply.PathsTracked);
            return reply;
        }
        finally
        {
            if (entered)
            {
                _resolveSlots.Release();
            }
            else
            {
                Interlocked.Decrement(ref _resolvesWaiting);
            }
        }
    }

    private static string SetupKey(TileTask task) => $"{task.FamilyHash}|{task.Settings}";

    private async Task<SweepContext> LoadSetupAsync(TileTask task, CancellationToken cancellation)
    {
        var setup = await _coordinator.FetchSweepSetupAsync(new SweepSetupRequest { FamilyHash = task.FamilyHash, Settings = task.Settings }, cancellationToken: cancellation).ConfigureAwait(false);
        var family = Family(setup.FamilyJson, task.FamilyHash);
        SweepOptions options;
        try
        {
            options = Conversions.ToOptions(setup.Settings, family.Parameters.Count);
        }
        catch (ArgumentException e)
        {
            throw RequestChecks.Invalid("settings", e.Message);
        }

        var fibers = new Dictionary<string, StartFiber>(StringComparer.Ordinal)
        {
            ["family"] = Fiber(setup.FamilyStart, "family", family.ContentHash),
            ["folds"] = Fiber(setup.FoldStart, "folds", SweepContext.FoldHash(family.ContentHash, options)),
            ["passages"] = Fiber(setup.PassageStart, "passages", SweepContext.PassageHash(family.ContentHash, options)),
        };
        _log.Information("sweep setup for family {FamilyHash} loaded ({Options})", task.FamilyHash, options.CanonicalText);
        return SweepContext.Create(family, options, kind => fibers[kind]);
    }

    private async Task<Resolver> LoadShardAsync(string atlasId, int version, string tile, bool verify, CancellationToken cancellation)
    {
        var shard = await _coordinator.FetchShardAsync(new ShardRequest { AtlasId = atlasId, Version = version, TileKey = tile }, cancellationToken: cancellation).ConfigureAwait(false);
        var family = Family(shard.FamilyJson, shard.FamilyHash);
        var start = Fiber(shard.StartFiber, "family", family.ContentHash);
        RequestChecks.StartFiberPaths(start.RootCount, "family", _options.Limits, $"resolve in tile {tile}");
        var info = new AtlasVersionInfo(shard.Version, null, "shard", DateTimeOffset.UnixEpoch, string.Empty, shard.ContentHash, "{}");
        var snapshot = AtlasSnapshot.FromTiles(atlasId, family, info, [.. shard.Tiles]);
        var solver = new FiberSolver(family.System, SolveOptions.Default with { MaxDegreeOfParallelism = 1 });
        _log.Information("shard {TileKey} of atlas {AtlasId} version {Version} loaded: {Tiles} tiles, {Samples} samples",
            tile, atlasId, version, shard.Tiles.Count, snapshot.Samples.Count);
        return new Resolver(snapshot, solver, start, options: ResolveOptions.Default with { VerifyFull = verify });
    }

    private FamilyDefinition Family(string json, string expectedHash)
    {
        if (_families.TryGetValue(expectedHash, out var known))
        {
            return known;
        }

        FamilyDefinition family;
        try
        {
            family = FamilyReader.Parse(json, "the family sent by the coordinator", _options.Limits.Family);
        }
        catch (InputException e)
        {
            throw new RpcException(new Status(StatusCode.DataLoss, e.Message));
        }

        if (family.ContentHash != expectedHash)
        {
            throw new RpcException(new Status(StatusCode.DataLoss, $"the coordinator sent family {family.ContentHash} for {expectedHash}"));
        }

        return _families.GetOrAdd(expectedHash, family);
    }

    private static StartFiber Fiber(ByteString bytes, string kind, string expectedHash)
    {
        try
        {
            return StartFiberFile.Deserialize(bytes.Span, $"the {kind} start fiber sent by the coordinator", expectedHash);
        }
        catch (InputException e)
        {
            throw new RpcException(new Status(StatusCode.DataLoss, e.Message));
        }
    }

    private async Task MisbehaveAsync(CancellationToken cancellation)
    {
        switch (_options.Fault)
        {
            case "hang":
                await Task.Delay(Timeout.Infinite, cancellation).ConfigureAwait(false);
                break;
            case { } fault when fault.StartsWith("slow:", StringComparison.Ordinal)
                && int.TryParse(fault.AsSpan(5), NumberStyles.None, CultureInfo.InvariantCulture, out var milliseconds):
                await Task.Delay(milliseconds, cancellation).ConfigureAwait(false);
                break;
        }
    }
}
