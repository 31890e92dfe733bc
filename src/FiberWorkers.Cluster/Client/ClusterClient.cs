using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Cluster.Routing;
using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using Grpc.Core;
using Grpc.Net.Client;

namespace FiberWorkers.Cluster.Client;

/// <summary>
/// A client of a coordinator: submits sweeps and follows them to the end (reconnecting while the coordinator
/// restarts), lists versions, and asks points through the coordinator or straight at the worker that the same
/// rendezvous hash picks.
/// </summary>
public sealed class ClusterClient : IDisposable
{
    private readonly GrpcChannel _channel;
    private readonly Dictionary<string, GrpcChannel> _workers = new(StringComparer.Ordinal);
    private readonly Lock _gate = new();
    private readonly int _maxMessageBytes;
    private readonly ClientSecurity _security;

    /// <summary>A client of <paramref name="coordinator"/>; <paramref name="security"/> (roots, client certificate, token) serves its workers too.</summary>
    public ClusterClient(Uri coordinator, int maxMessageBytes = 64 << 20, ClientSecurity? security = null)
    {
        ArgumentNullException.ThrowIfNull(coordinator);
        _maxMessageBytes = maxMessageBytes;
        _security = security ?? ClientSecurity.None;
        _channel = Connect(coordinator);
        Coordinator = new Coordinator.CoordinatorClient(_channel);
    }

    /// <summary>The raw coordinator client.</summary>
    public Coordinator.CoordinatorClient Coordinator { get; }

    /// <summary>How long a sweep may go without reaching the coordinator before <see cref="SweepAsync"/> gives up.</summary>
    public TimeSpan ReconnectPatience { get; init; } = TimeSpan.FromMinutes(2);

    /// <summary>
    /// Submits a sweep and streams its progress until it commits; returns the outcome. While the coordinator is
    /// unreachable (restarting) the client keeps trying: once it holds the sweep's id it watches that sweep again
    /// (a restarted coordinator resumes it, or reports it committed when it finished before the restart), and only
    /// when the coordinator says the sweep is not running there does it resubmit the request, which resumes it.
    /// Resubmitting at once instead would start a second sweep, and a second version, of a sweep that had committed
    /// just before the coordinator went away.
    /// </summary>
    public async Task<SweepOutcome> SweepAsync(SubmitSweepRequest request, IProgress<SweepProgressUpdate>? progress = null, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(request);
        var lastContact = DateTimeOffset.UtcNow;
        var delay = TimeSpan.FromMilliseconds(200);
        long? sweepId = null;
        while (true)
        {
            try
            {
                sweepId ??= (await Coordinator.SubmitSweepAsync(request, cancellationToken: cancellation).ConfigureAwait(false)).SweepId;
                using var call = Coordinator.WatchSweep(new WatchSweepRequest { SweepId = sweepId.Value }, cancellationToken: cancellation);
                await foreach (var update in call.ResponseStream.ReadAllAsync(cancellation).ConfigureAwait(false))
                {
                    lastContact = DateTimeOffset.UtcNow;
                    delay = TimeSpan.FromMilliseconds(200);
                    progress?.Report(update);
                    if (update.Finished)
                    {
                        return update.Outcome;
                    }

                    if (update.Failed)
                    {
                        throw new RpcException(new Status(StatusCode.Aborted, update.Failure));
                    }
                }
            }
            catch (RpcException e) when (e.StatusCode is StatusCode.Unavailable or StatusCode.Internal or StatusCode.Cancelled or StatusCode.FailedPrecondition
                && !cancellation.IsCancellationRequested && DateTimeOffset.UtcNow - lastContact < ReconnectPatience)
            {
                // The coordinator went away (or is resuming). Not running there (FailedPrecondition): the request is
                // submitted again, which resumes the same sweep; otherwise the same sweep is watched again.
                if (e.StatusCode == StatusCode.FailedPrecondition)
                {
                    sweepId = null;
                }
            }

            await Task.Delay(delay, cancellation).ConfigureAwait(false);
            delay = TimeSpan.FromTicks(Math.Min(delay.Ticks * 2, TimeSpan.FromSeconds(2).Ticks));
        }
    }

    /// <summary>The versions of one atlas (with its family and grid), or of every atlas.</summary>
    public async Task<IReadOnlyList<AtlasVersion>> VersionsAsync(string atlasId, CancellationToken cancellation = default)
    {
        var reply = await Coordinator.ListVersionsAsync(new ListVersionsRequest { AtlasId = atlasId ?? string.Empty }, cancellationToken: cancellation).ConfigureAwait(false);
        return reply.Versions;
    }

    /// <summary>Asks through the coordinator, which routes the point to a worker.</summary>
    public async Task<AskReply> AskAsync(AskRequest request, CancellationToken cancellation = default) =>
        await Coordinator.AskAsync(request, cancellationToken: cancellation).ConfigureAwait(false);

    /// <summary>
    /// Asks the worker the coordinator would pick, directly: the point's level-0 tile (from the atlas's family and
    /// grid) is hashed over the live workers; on failure the next worker in hash order is tried.
    /// </summary>
    public async Task<AskReply> AskDirectAsync(AskRequest request, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(request);
        var versions = await VersionsAsync(request.AtlasId, cancellation).ConfigureAwait(false);
        var version = request.Version == 0 ? versions.LastOrDefault() : versions.FirstOrDefault(v => v.Version == request.Version);
        if (version is null)
        {
            throw new RpcException(new Status(StatusCode.NotFound, $"atlas '{request.AtlasId}' has no version {(request.Version == 0 ? "yet" : request.Version)}"));
        }

        var family = FamilyReader.Parse(version.FamilyJson, $"atlas {request.AtlasId} (family)");
        if (request.Point.Count != family.Parameters.Count)
        {
            throw new RpcException(new Status(StatusCode.InvalidArgument, $"point: {request.Point.Count} values given, the family has {family.Parameters.Count} parameters"));
        }

        var tile = TileKey.Containing([.. request.Point], family.Parameters, [.. version.Divisions]).ToString();
        var workers = (await Coordinator.ListWorkersAsync(new ListWorkersRequest(), cancellationToken: cancellation).ConfigureAwait(false)).Workers;
        var order = Route(tile, workers);
        var forwarded = new ResolveRequest { Ask = request, TileKey = tile, Version = version.Version };
        RpcException? last = null;
        foreach (var worker in order)
        {
            try
            {
                var client = new Worker.WorkerClient(WorkerChannel(worker.Address));
                return await client.ResolveAsync(forwarded, cancellationToken: cancellation).ConfigureAwait(false);
            }
            catch (RpcException e) when (e.StatusCode is StatusCode.Unavailable or StatusCode.DeadlineExceeded or StatusCode.Internal)
            {
                last = e;
            }
        }

        throw last ?? new RpcException(new Status(StatusCode.Unavailable, "no live workers"));
    }

    /// <summary>The workers in the order a tile tries them (the coordinator's order for the same list).</summary>
    public static IReadOnlyList<WorkerState> Route(string tileKey, IEnumerable<WorkerState> workers) =>
        Rendezvous.Order(tileKey, workers, w => w.WorkerId);

    public void Dispose()
    {
        _channel.Dispose();
        lock (_gate)
        {
            foreach (var channel in _workers.Values)
            {
                channel.Dispose();
            }

            _workers.Clear();
        }
    }

    private GrpcChannel WorkerChannel(string address)
    {
        lock (_gate)
        {
            if (!_workers.TryGetValue(address, out var channel))
            {
                channel = Connect(new Uri(address));
                _workers[address] = channel;
            }

            return channel;
        }
    }

    private GrpcChannel Connect(Uri address) => ChannelSecurity.Open(address, _security, _maxMessageBytes);
}
