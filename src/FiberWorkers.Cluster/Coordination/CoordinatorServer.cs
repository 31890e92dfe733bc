using System.Diagnostics;
using System.Runtime.CompilerServices;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Hosting;
using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.DependencyInjection;
using Serilog;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>
/// A running coordinator: the gRPC service, its worker pool, sweeps and router over one ledger store. On start it
/// resumes every sweep the store holds as unfinished. On SIGTERM (or disposal) it drains: new sweeps and asks are
/// refused, tiles in flight are merged as they come back (for up to the drain timeout), running sweeps pause with their
/// merged tiles in the store, and the host stops.
/// </summary>
public sealed class CoordinatorServer : IAsyncDisposable
{
    private readonly GrpcHost _host;
    private readonly WorkerPool _pool;
    private readonly SweepManager _sweeps;
    private readonly CancellationTokenSource _stop = new();
    private readonly Task _monitor;
    private readonly Action _beginStopping;
    private readonly StrongBox<long> _stoppingSince;
    private readonly TimeSpan _drainTimeout;
    private readonly ClusterMetrics _metrics;
    private readonly ILogger _log;

    private CoordinatorServer(GrpcHost host, WorkerPool pool, SweepManager sweeps, CoordinatorOptions options, Action beginStopping, StrongBox<long> stoppingSince, ClusterMetrics metrics, ILogger log)
    {
        _host = host;
        _pool = pool;
        _sweeps = sweeps;
        _beginStopping = beginStopping;
        _stoppingSince = stoppingSince;
        _drainTimeout = options.DrainTimeout;
        _metrics = metrics;
        _log = log;
        _monitor = MonitorAsync(options.Heartbeat, _stop.Token);
    }

    /// <summary>The bound address.</summary>
    public Uri Address => _host.Address;

    /// <summary>The admin listener's address (metrics), or null without one.</summary>
    public Uri? AdminAddress => _host.AdminAddress;

    public WorkerPool Workers => _pool;

    public SweepManager Sweeps => _sweeps;

    /// <summary>Completes when the host stops (for example on SIGTERM).</summary>
    public Task Stopped => _host.Stopped;

    public static async Task<CoordinatorServer> StartAsync(
        ISweepLedger ledger, CoordinatorOptions options, ListenAddress listen, ILogger log, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(ledger);
        ArgumentNullException.ThrowIfNull(options);
        ArgumentNullException.ThrowIfNull(listen);
        ArgumentNullException.ThrowIfNull(log);
        var pool = new WorkerPool(options, log);
        var catalog = new AtlasCatalog(ledger) { FamilyLimits = options.Limits.Family };
        var metrics = new ClusterMetrics();
        var dispatcher = new TileDispatcher(pool, ledger, options, log, metrics);
        var sweeps = new SweepManager(ledger, dispatcher, pool, catalog, options, log);
        var router = new AskRouter(pool, catalog, options, log);
        metrics.ObserveCoordinator(
            () => pool.Live().Count,
            () => pool.All().Select(w => (w.Id, w.AsksInFlight, w.TilesInFlight)),
            sweeps.Pending);
        var stoppingSince = new StrongBox<long>(0);
        void BeginStopping()
        {
            if (Interlocked.CompareExchange(ref stoppingSince.Value, Stopwatch.GetTimestamp(), 0) != 0)
            {
                return;
            }

            // Workers may no longer reach a stopping host with their heartbeats: none is declared lost meanwhile, so
            // no tile in flight is cancelled for want of a heartbeat.
            pool.HoldLosses = true;
            router.BeginStopping();
            sweeps.BeginDraining();
            log.Information("coordinator stopping: no new sweeps or asks; {Sweeps} running sweeps merge their tiles in flight (for up to {Seconds:F1} s) and pause",
                sweeps.Running, options.DrainTimeout.TotalSeconds);
        }

        var host = await GrpcHost.StartAsync(
            new HostSettings { Listen = listen, Logger = log, MaxMessageBytes = options.MaxMessageBytes, DrainTimeout = options.DrainTimeout, Security = options.Security, AdminListen = options.AdminListen, Stopping = BeginStopping },
            services =>
            {
                services.AddSingleton(options);
                services.AddSingleton(pool);
                services.AddSingleton(catalog);
                services.AddSingleton(sweeps);
                services.AddSingleton(router);
                services.AddSingleton(new QueryRateLimiter(options.Limits));
            },
            app => app.MapGrpcService<CoordinatorService>(),
            cancellation).ConfigureAwait(false);
        log.Information("coordinator listening on {Address}", host.Address.ToString().TrimEnd('/'));
        sweeps.ResumeUnfinished();
        return new CoordinatorServer(host, pool, sweeps, options, BeginStopping, stoppingSince, metrics, log);
    }

    /// <summary>Stops as on SIGTERM (see the class summary); completes when the host stopped.</summary>
    public Task StopAsync() => _host.StopAsync();

    public async ValueTask DisposeAsync()
    {
        // Whatever the host's own drain covered (calls coming in), the tiles this coordinator handed out are calls going
        // out: wait for them, within what is left of the drain timeout, before anything is cancelled.
        _beginStopping();
        var left = _drainTimeout - Stopwatch.GetElapsedTime(Volatile.Read(ref _stoppingSince.Value));
        var drained = await _sweeps.DrainAsync(left > TimeSpan.Zero ? left : TimeSpan.Zero).ConfigureAwait(false);
        await _stop.CancelAsync().ConfigureAwait(false);
        try
        {
            await _monitor.ConfigureAwait(false);
        }
        catch (OperationCanceledException)
        {
            // Stopped on purpose.
        }

        _sweeps.Dispose();
        await _host.DisposeAsync().ConfigureAwait(false);
        _pool.Dispose();
        _metrics.Dispose();
        _stop.Dispose();
        _log.Information("coordinator stopped ({Drain})", drained ? "every tile in flight came back" : "the drain ran out");
    }

    private async Task MonitorAsync(TimeSpan interval, CancellationToken cancellation)
    {
        using var timer = new PeriodicTimer(interval / 2);
        while (await timer.WaitForNextTickAsync(cancellation).ConfigureAwait(false))
        {
            _pool.SweepLost();
        }
    }
}
