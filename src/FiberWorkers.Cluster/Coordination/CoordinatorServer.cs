using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Hosting;
using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.DependencyInjection;
using Serilog;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>
/// A running coordinator: the gRPC service, its worker pool, sweeps and router over one ledger store. On start it
/// resumes every sweep the store holds as unfinished.
/// </summary>
public sealed class CoordinatorServer : IAsyncDisposable
{
    private readonly GrpcHost _host;
    private readonly WorkerPool _pool;
    private readonly SweepManager _sweeps;
    private readonly CancellationTokenSource _stop = new();
    private readonly Task _monitor;

    private CoordinatorServer(GrpcHost host, WorkerPool pool, SweepManager sweeps, CoordinatorOptions options)
    {
        _host = host;
        _pool = pool;
        _sweeps = sweeps;
        _monitor = MonitorAsync(options.Heartbeat, _stop.Token);
    }

    /// <summary>The bound address.</summary>
    public Uri Address => _host.Address;

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
        var dispatcher = new TileDispatcher(pool, ledger, options, log);
        var sweeps = new SweepManager(ledger, dispatcher, pool, catalog, options, log);
        var router = new AskRouter(pool, catalog, options, log);
        var host = await GrpcHost.StartAsync(
            new HostSettings { Listen = listen, Logger = log, MaxMessageBytes = options.MaxMessageBytes, DrainTimeout = options.DrainTimeout, Security = options.Security },
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
        return new CoordinatorServer(host, pool, sweeps, options);
    }

    public async ValueTask DisposeAsync()
    {
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
        _stop.Dispose();
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
