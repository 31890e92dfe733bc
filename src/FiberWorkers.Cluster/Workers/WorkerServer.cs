using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Contracts.V1;
using Grpc.Core;
using Grpc.Net.Client;
using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.DependencyInjection;
using Serilog;

namespace FiberWorkers.Cluster.Workers;

/// <summary>A running worker: its gRPC service and the agent that keeps it registered with the coordinator.</summary>
public sealed class WorkerServer : IAsyncDisposable
{
    private readonly GrpcHost _host;
    private readonly GrpcChannel _channel;
    private readonly WorkerRuntime _runtime;
    private readonly CancellationTokenSource _stop = new();
    private readonly Task _agentTask;
    private readonly ILogger _log;
    private readonly ClusterMetrics _metrics;

    private WorkerServer(GrpcHost host, GrpcChannel channel, WorkerRuntime runtime, WorkerAgent agent, ClusterMetrics metrics, ILogger log)
    {
        _host = host;
        _channel = channel;
        _runtime = runtime;
        _metrics = metrics;
        _log = log;
        Agent = agent;
        _agentTask = agent.RunAsync(_stop.Token);
    }

    public Uri Address => _host.Address;

    /// <summary>The admin listener's address (metrics), or null without one.</summary>
    public Uri? AdminAddress => _host.AdminAddress;

    public string Id => _runtime.Id;

    public WorkerAgent Agent { get; }

    /// <summary>Completes when the host stops (for example on SIGTERM).</summary>
    public Task Stopped => _host.Stopped;

    public static async Task<WorkerServer> StartAsync(WorkerOptions options, ListenAddress listen, ILogger log, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(options);
        ArgumentNullException.ThrowIfNull(listen);
        ArgumentNullException.ThrowIfNull(log);
        var channel = Security.ChannelSecurity.Open(options.Coordinator, options.Security.Outbound, options.MaxMessageBytes);
        var coordinator = new Coordinator.CoordinatorClient(channel);
        var metrics = new ClusterMetrics();
        var runtime = new WorkerRuntime(options, coordinator, log, metrics);
        metrics.ObserveWorker(runtime.Id, () => runtime.ResolvesWaiting, () => runtime.TilesRunning);
        WorkerAgent? agent = null;
        var host = await GrpcHost.StartAsync(
            new HostSettings
            {
                Listen = listen,
                Logger = log,
                MaxMessageBytes = options.MaxMessageBytes,
                DrainTimeout = options.DrainTimeout,
                Security = options.Security,
                AdminListen = options.AdminListen,

                // A stopping worker is no longer ready, so orchestrators stop sending it clients.
                Ready = () => agent?.Registered == true && !runtime.IsStopping,
                Stopping = () =>
                {
                    runtime.BeginStopping();
                    log.Information("worker {WorkerId} stopping: no new tiles; {Running} tiles in flight finish first or are handed back after {HandBackSeconds:F1} s",
                        runtime.Id, runtime.TilesRunning, runtime.HandBackAfter.TotalSeconds);

                    // In parallel with the host's drain (this callback must not block it): the coordinator stops routing
                    // tiles and asks here, while the tiles in flight still finish and are returned.
                    if (agent is { } registered)
                    {
                        _ = registered.DeregisterAsync(final: false);
                    }
                },
            },
            services => services.AddSingleton(runtime),
            app => app.MapGrpcService<WorkerService>(),
            cancellation).ConfigureAwait(false);
        var advertise = options.Advertise ?? host.Address;
        agent = new WorkerAgent(coordinator, runtime, advertise, options.Threads, log);
        log.Information("worker {WorkerId} listening on {Address} with {Threads} threads; coordinator {Coordinator}",
            runtime.Id, host.Address.ToString().TrimEnd('/'), options.Threads, options.Coordinator.ToString().TrimEnd('/'));
        return new WorkerServer(host, channel, runtime, agent, metrics, log);
    }

    /// <summary>
    /// Stops as on SIGTERM: refuses new tiles, deregisters (draining), lets tiles in flight finish or hands them back
    /// when the drain runs out, then deregisters for good. Completes when the host stopped.
    /// </summary>
    public Task StopAsync() => _host.StopAsync();

    /// <summary>Refuses new tiles; tiles and resolves in flight finish while the host shuts down.</summary>
    public void BeginStopping()
    {
        _runtime.BeginStopping();
        _log.Information("worker {WorkerId} stopping: no new tiles; {Running} tiles in flight finish first", _runtime.Id, _runtime.TilesRunning);
    }

    public async ValueTask DisposeAsync()
    {
        _runtime.BeginStopping();
        await _host.DisposeAsync().ConfigureAwait(false);
        await _stop.CancelAsync().ConfigureAwait(false);
        try
        {
            await _agentTask.ConfigureAwait(false);
        }
        catch (OperationCanceledException)
        {
            // Stopped on purpose.
        }
        catch (RpcException e) when (e.StatusCode == StatusCode.Cancelled)
        {
            // A heartbeat in flight when the stop came: cancelled on purpose too.
        }

        // Every call has ended: the coordinator may forget this worker now rather than after its missed heartbeats.
        await Agent.DeregisterAsync(final: true).ConfigureAwait(false);
        _log.Information("worker {WorkerId} stopped", _runtime.Id);
        _runtime.Dispose();
        _channel.Dispose();
        _metrics.Dispose();
        _stop.Dispose();
    }
}
