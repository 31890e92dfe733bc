using FiberWorkers.Contracts.V1;
using Grpc.Core;
using Serilog;

namespace FiberWorkers.Cluster.Workers;

/// <summary>
/// Keeps a worker registered: registers (retrying with backoff while the coordinator is unreachable), heartbeats at
/// the interval the coordinator asks for, and registers again when the coordinator no longer knows the worker (it
/// restarted, or declared the worker lost).
/// </summary>
public sealed class WorkerAgent
{
    private readonly Coordinator.CoordinatorClient _coordinator;
    private readonly WorkerRuntime _runtime;
    private readonly Uri _advertise;
    private readonly int _threads;
    private readonly ILogger _log;
    private volatile bool _registered;

    public WorkerAgent(Coordinator.CoordinatorClient coordinator, WorkerRuntime runtime, Uri advertise, int threads, ILogger log)
    {
        _coordinator = coordinator;
        _runtime = runtime;
        _advertise = advertise;
        _threads = threads;
        _log = log;
    }

    /// <summary>True while the coordinator knows this worker.</summary>
    public bool Registered => _registered;

    public async Task RunAsync(CancellationToken cancellation)
    {
        var backoff = TimeSpan.FromMilliseconds(200);
        var warned = false;
        while (!cancellation.IsCancellationRequested)
        {
            // A stopping worker keeps heartbeating (its tiles in flight must not be declared lost) but never
            // registers again: the coordinator has forgotten it on purpose, or will.
            if (_runtime.IsStopping)
            {
                return;
            }

            try
            {
                var reply = await _coordinator.RegisterWorkerAsync(
                    new RegisterWorkerRequest { WorkerId = _runtime.Id, Address = _advertise.ToString().TrimEnd('/'), Threads = _threads },
                    deadline: DateTime.UtcNow.AddSeconds(5),
                    cancellationToken: cancellation).ConfigureAwait(false);
                _registered = true;
                warned = false;
                backoff = TimeSpan.FromMilliseconds(200);
                _log.Information("worker {WorkerId} registered with the coordinator as {Address}", _runtime.Id, _advertise.ToString().TrimEnd('/'));
                var interval = TimeSpan.FromSeconds(Math.Clamp(reply.HeartbeatSeconds, 0.05, 60));
                while (!cancellation.IsCancellationRequested)
                {
                    await Task.Delay(interval, cancellation).ConfigureAwait(false);
                    var beat = await _coordinator.HeartbeatAsync(
                        new HeartbeatRequest { WorkerId = _runtime.Id, TilesRunning = _runtime.TilesRunning, ResolvesQueued = _runtime.ResolvesWaiting },
                        deadline: DateTime.UtcNow + (interval * 2),
                        cancellationToken: cancellation).ConfigureAwait(false);
                    if (!beat.Known)
                    {
                        _registered = false;
                        _log.Warning("the coordinator no longer knows worker {WorkerId}; registering again", _runtime.Id);
                        break;
                    }
                }
            }
            catch (RpcException) when (cancellation.IsCancellationRequested)
            {
                // A call in flight when the worker stopped ends as Cancelled: that is the end of the loop, not an error.
                return;
            }
            catch (RpcException e) when (_runtime.IsStopping)
            {
                // Stopping: no more registering; the coordinator learns the rest from DeregisterWorker or silence.
                _log.Information("worker {WorkerId} stopped heartbeating while stopping ({Status})", _runtime.Id, e.StatusCode);
                return;
            }
            catch (RpcException e)
            {
                _registered = false;
                if (!warned)
                {
                    _log.Warning("cannot reach the coordinator ({Status}: {Detail}); retrying", e.StatusCode, e.Status.Detail);
                    warned = true;
                }

                await Task.Delay(backoff, cancellation).ConfigureAwait(false);
                backoff = TimeSpan.FromTicks(Math.Min(backoff.Ticks * 2, TimeSpan.FromSeconds(2).Ticks));
            }
        }
    }

    /// <summary>
    /// Tells the coordinator that this worker stops: first (<paramref name="final"/> false) that it drains, so no new
    /// tiles or asks are routed to it; then that it is gone. Best effort within two seconds: an unreachable
    /// coordinator finds out from the missing heartbeats instead.
    /// </summary>
    public async Task DeregisterAsync(bool final, CancellationToken cancellation = default)
    {
        try
        {
            var reply = await _coordinator.DeregisterWorkerAsync(
                new DeregisterWorkerRequest { WorkerId = _runtime.Id, Final = final, Reason = "stopping" },
                deadline: DateTime.UtcNow.AddSeconds(2),
                cancellationToken: cancellation).ConfigureAwait(false);
            _log.Information("worker {WorkerId} deregistered from the coordinator ({Step}; known: {Known})", _runtime.Id, final ? "gone" : "draining", reply.Known);
        }
        catch (RpcException e)
        {
            _log.Warning("worker {WorkerId} could not deregister ({Step}): {Status}: {Detail}", _runtime.Id, final ? "gone" : "draining", e.StatusCode, e.Status.Detail);
        }
        catch (OperationCanceledException)
        {
            _log.Warning("worker {WorkerId} could not deregister ({Step}): the drain ran out", _runtime.Id, final ? "gone" : "draining");
        }
    }
}
