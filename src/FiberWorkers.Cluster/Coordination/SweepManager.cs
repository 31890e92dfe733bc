using System.Threading.Channels;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Contracts.V1;
using Google.Protobuf;
using Grpc.Core;
using Serilog;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>
/// Runs the coordinator's sweeps: a submission is validated, recorded in the ledger (so a restarted coordinator
/// resumes it) and run in the background by the same <see cref="SweepRunner"/> as the embedded sweep, with tiles
/// computed by workers through the <see cref="TileDispatcher"/>; progress goes to every watcher.
/// </summary>
public sealed class SweepManager : IDisposable
{
    private readonly ISweepLedger _ledger;
    private readonly TileDispatcher _dispatcher;
    private readonly WorkerPool _pool;
    private readonly AtlasCatalog _catalog;
    private readonly CoordinatorOptions _options;
    private readonly ILogger _log;
    private readonly Lock _gate = new();
    private readonly Lock _admission = new();
    private readonly Dictionary<long, SweepRun> _runs = [];
    private readonly CancellationTokenSource _stopping = new();

    public SweepManager(ISweepLedger ledger, TileDispatcher dispatcher, WorkerPool pool, AtlasCatalog catalog, CoordinatorOptions options, ILogger log)
    {
        _ledger = ledger;
        _dispatcher = dispatcher;
        _pool = pool;
        _catalog = catalog;
        _options = options;
        _log = log;
    }

    /// <summary>Sweeps running in this process.</summary>
    public int Running
    {
        get
        {
            lock (_gate)
            {
                return _runs.Values.Count(r => !r.Done);
            }
        }
    }

    /// <summary>
    /// Validates and starts (or joins) a sweep. <paramref name="caller"/> (see <c>Caller.Key</c>) may have at most
    /// <see cref="RequestLimits.MaxConcurrentSweeps"/> sweeps running; joining one that runs does not count. Null:
    /// not counted (sweeps resumed after a restart, in-process callers).
    /// </summary>
    /// <param name="request">The submission.</param>
    /// <param name="caller">Who counts it (see <c>Caller.Key</c>); null: not counted.</param>
    /// <param name="atlasNamespace">The tenant's namespace the atlas lives in ("acme/", see <c>TenantScope</c>); null: none.</param>
    public SubmitSweepReply Submit(SubmitSweepRequest request, string? caller = null, string? atlasNamespace = null)
    {
        ArgumentNullException.ThrowIfNull(request);
        if (_dispatcher.IsDraining)
        {
            throw StoppingRefusal.Create("coordinator", "the coordinator is stopping: submit the sweep again once it is back (it resumes from the merged tiles)");
        }

        var (family, options) = Parse(request);
        long sweepId;
        string atlasId;
        bool started;
        lock (_admission)
        {
            // Held from the count to the start, so two submissions of one caller cannot both take the last slot.
            Admit(caller, atlasNamespace + SweepRunner.AtlasIdOf(family), options.CanonicalText);
            (atlasId, sweepId) = new SweepRunner(_ledger) { AtlasNamespace = atlasNamespace }.Begin(family, options);
            _ledger.SaveSweepRequest(sweepId, atlasId, request.ToByteArray());
            started = Start(sweepId, atlasId, family, options, caller);
        }

        _log.Information("sweep {SweepId} of atlas {AtlasId} ({Family}) submitted: {Options}; {Action}",
            sweepId, atlasId, family.Name, options.CanonicalText, started ? "started" : "already running");
        return new SubmitSweepReply { AtlasId = atlasId, SweepId = sweepId, Started = started };
    }

    /// <summary>Starts every sweep the ledger holds as unfinished (after a restart).</summary>
    public void ResumeUnfinished()
    {
        foreach (var record in _ledger.UnfinishedSweepRequests())
        {
            try
            {
                var request = SubmitSweepRequest.Parser.ParseFrom(record.Request);
                var (family, options) = Parse(request);
                if (Start(record.SweepId, record.AtlasId, family, options))
                {
                    _log.Information("sweep {SweepId} of atlas {AtlasId} resumed after a restart", record.SweepId, record.AtlasId);
                }
            }
            catch (Exception e) when (e is RpcException or InvalidProtocolBufferException or InputException)
            {
                _log.Error("sweep {SweepId} cannot be resumed: its kept request is unreadable ({Reason})", record.SweepId, e.Message);
            }
        }
    }

    /// <summary>The store id of the atlas a sweep writes to (running here or recorded in the ledger), or null for an unknown sweep.</summary>
    public string? AtlasOf(long sweepId)
    {
        lock (_gate)
        {
            if (_runs.TryGetValue(sweepId, out var run))
            {
                return run.AtlasId;
            }
        }

        return _ledger.Sweep(sweepId)?.AtlasId;
    }

    /// <summary>Streams progress until the sweep finishes or fails.</summary>
    public async Task WatchAsync(long sweepId, IServerStreamWriter<SweepProgressUpdate> stream, CancellationToken cancellation)
    {
        ArgumentNullException.ThrowIfNull(stream);
        SweepRun? run;
        lock (_gate)
        {
            _runs.TryGetValue(sweepId, out run);
        }

        if (run is null)
        {
            var record = _ledger.Sweep(sweepId) ?? throw new RpcException(new Status(StatusCode.NotFound, $"sweep_id: no sweep {sweepId}"));
            if (record is { State: "committed", Version: { } version })
            {
                var summary = new SweepRunner(_ledger).Summarize(record.AtlasId, version);
                await stream.WriteAsync(Final(sweepId, record.AtlasId, Conversions.ToOutcome(summary, sweepId)), cancellation).ConfigureAwait(false);
                return;
            }

            throw new RpcException(new Status(StatusCode.FailedPrecondition, $"sweep_id: sweep {sweepId} is not running here; submit it again to resume it"));
        }

        var reader = run.Subscribe();
        try
        {
            await foreach (var update in reader.ReadAllAsync(cancellation).ConfigureAwait(false))
            {
                update.Workers.Clear();
                update.Workers.Add(_pool.Live().Select(w => w.ToMessage()));
                if (update.Failed && _dispatcher.IsDraining)
                {
                    // Not the sweep's failure: the watcher should come back (resubmit) once the coordinator is back.
                    throw StoppingRefusal.Create("coordinator", $"the coordinator is stopping: sweep {sweepId} keeps its {update.TilesDone} merged tiles and resumes when it restarts");
                }

                await stream.WriteAsync(update, cancellation).ConfigureAwait(false);
                if (update.Finished || update.Failed)
                {
                    return;
                }
            }
        }
        finally
        {
            run.Unsubscribe(reader);
        }
    }

    /// <summary>
    /// The coordinator stops: new submissions are refused (Unavailable, "the coordinator is stopping"), no tile gets a
    /// new attempt, and tiles in flight are merged when they come back; each running sweep then ends, keeping every
    /// merged tile for the restart.
    /// </summary>
    public void BeginDraining() => _dispatcher.BeginDraining();

    /// <summary>Waits until every running sweep ended after <see cref="BeginDraining"/>, or <paramref name="timeout"/> passed; true when they all ended.</summary>
    public async Task<bool> DrainAsync(TimeSpan timeout)
    {
        Task[] running;
        lock (_gate)
        {
            running = [.. _runs.Values.Where(r => !r.Done).Select(r => r.Task).OfType<Task>()];
        }

        var all = Task.WhenAll(running);
        var ended = await Task.WhenAny(all, Task.Delay(timeout)).ConfigureAwait(false) == all;
        if (!ended)
        {
            _log.Warning("{Count} sweeps still had tiles in flight when the drain ran out; those tiles run again after the restart", running.Count(t => !t.IsCompleted));
        }

        return ended;
    }

    /// <summary>Tiles planned but not yet merged, per sweep running here (for the metrics).</summary>
    public IReadOnlyList<(long Sweep, long Pending)> Pending()
    {
        lock (_gate)
        {
            return [.. _runs.Values.Where(r => !r.Done).Select(r => (r.SweepId, (long)Math.Max(0, r.Latest.TilesPlanned - r.Latest.TilesDone)))];
        }
    }

    /// <summary>Stops running sweeps (their finished tiles are in the ledger; a restart resumes them).</summary>
    public void Dispose()
    {
        _stopping.Cancel();
        Task[] running;
        lock (_gate)
        {
            running = [.. _runs.Values.Select(r => r.Task).OfType<Task>()];
        }

        try
        {
            Task.WaitAll(running, TimeSpan.FromSeconds(10));
        }
        catch (AggregateException)
        {
            // Cancelled sweeps end with exceptions; they are resumed later.
        }

        _stopping.Dispose();
    }

    private (FamilyDefinition Family, SweepOptions Options) Parse(SubmitSweepRequest request)
    {
        var submission = RequestChecks.SubmitSweep(request, _options.Limits, _options.StartFiberThreads);
        return (submission.Family, submission.Options);
    }

    /// <summary>Refuses (ResourceExhausted) a new sweep of a caller who already has the most running.</summary>
    private void Admit(string? caller, string atlasId, string optionsText)
    {
        if (caller is null)
        {
            return;
        }

        lock (_gate)
        {
            if (_runs.Values.Any(r => !r.Done && r.AtlasId == atlasId && r.OptionsText == optionsText))
            {
                return;
            }

            var running = _runs.Values.Count(r => !r.Done && r.Caller == caller);
            if (running >= _options.Limits.MaxConcurrentSweeps)
            {
                throw new RpcException(new Status(
                    StatusCode.ResourceExhausted,
                    $"sweep: {caller} already has {running} sweeps running, the limit max-concurrent-sweeps = {_options.Limits.MaxConcurrentSweeps}; wait for one to finish"));
            }
        }
    }

    private bool Start(long sweepId, string atlasId, FamilyDefinition family, SweepOptions options, string? caller = null)
    {
        SweepRun run;
        lock (_gate)
        {
            if (_runs.TryGetValue(sweepId, out var existing) && !existing.Done)
            {
                return false;
            }

            run = new SweepRun(sweepId, atlasId) { Caller = caller, OptionsText = options.CanonicalText };
            _runs[sweepId] = run;
        }

        run.Task = Task.Factory.StartNew(() => Execute(run, family, options), _stopping.Token, TaskCreationOptions.LongRunning, TaskScheduler.Default).Unwrap();
        return true;
    }

    private async Task Execute(SweepRun run, FamilyDefinition family, SweepOptions options)
    {
        var progress = new Progress(run);
        try
        {
            var runner = new SweepRunner(_ledger, _dispatcher.OnMerged) { AtlasNamespace = Security.TenantScope.NamespaceOf(run.AtlasId) };
            var summary = await runner.RunAsync(family, options, _dispatcher.ComputeAsync, progress, _stopping.Token).ConfigureAwait(false);
            _catalog.Committed(run.AtlasId);
            _log.Information("sweep {SweepId} committed version {Version} of atlas {AtlasId}: {Tiles} tiles, {Samples} samples, content {ContentHash}",
                run.SweepId, summary.AtlasVersion, run.AtlasId, summary.Tiles, summary.Samples, summary.ContentHash);
            run.Finish(Final(run.SweepId, run.AtlasId, Conversions.ToOutcome(summary, run.SweepId)));
        }
        catch (OperationCanceledException) when (_stopping.IsCancellationRequested || _dispatcher.IsDraining)
        {
            _log.Information("sweep {SweepId} of atlas {AtlasId} paused: the coordinator is stopping; {Done} tiles merged, the rest run after the restart",
                run.SweepId, run.AtlasId, run.Latest.TilesDone);
            run.Finish(Failed(run, "the coordinator is stopping; the sweep resumes when it restarts"));
        }
        catch (Exception e)
        {
            _log.Error("sweep {SweepId} of atlas {AtlasId} failed: {Reason}", run.SweepId, run.AtlasId, Flatten(e));
            run.Finish(Failed(run, $"{Flatten(e)}; its finished tiles are kept: submit it again to resume"));
        }
    }

    private static string Flatten(Exception e) => e is AggregateException aggregate && aggregate.InnerExceptions.Count > 0
        ? string.Join("; ", aggregate.InnerExceptions.Select(Flatten).Distinct())
        : e.Message;

    private static SweepProgressUpdate Final(long sweepId, string atlasId, SweepOutcome outcome) => new()
    {
        SweepId = sweepId,
        AtlasId = atlasId,
        Stage = "done",
        TilesDone = outcome.Tiles,
        TilesPlanned = outcome.Tiles,
        Samples = outcome.Samples,
        Crossings = outcome.Crossings,
        EtaSeconds = 0,
        Outcome = outcome,
        Finished = true,
    };

    private static SweepProgressUpdate Failed(SweepRun run, string reason)
    {
        var update = run.Latest.Clone();
        update.Failure = reason;
        update.Failed = true;
        return update;
    }

    /// <summary>A sweep running in this process and its watchers.</summary>
    private sealed class SweepRun(long sweepId, string atlasId)
    {
        private readonly Lock _gate = new();
        private readonly List<Channel<SweepProgressUpdate>> _watchers = [];

        public long SweepId { get; } = sweepId;

        public string AtlasId { get; } = atlasId;

        /// <summary>Who started it (counted against their concurrent sweeps); null when not counted.</summary>
        public string? Caller { get; init; }

        /// <summary>The sweep's canonical options text (a submission with the same atlas and text joins it).</summary>
        public string OptionsText { get; init; } = string.Empty;

        public Task? Task { get; set; }

        public bool Done { get; private set; }

        public SweepProgressUpdate Latest { get; private set; } = new() { SweepId = sweepId, AtlasId = atlasId, Stage = "queued", EtaSeconds = -1 };

        public ChannelReader<SweepProgressUpdate> Subscribe()
        {
            // Only the newest update matters to a slow watcher; the final one is never dropped (it is the last).
            var channel = Channel.CreateBounded<SweepProgressUpdate>(new BoundedChannelOptions(4) { FullMode = BoundedChannelFullMode.DropOldest });
            lock (_gate)
            {
                channel.Writer.TryWrite(Latest.Clone());
                if (Done)
                {
                    channel.Writer.TryComplete();
                }
                else
                {
                    _watchers.Add(channel);
                }
            }

            return channel.Reader;
        }

        public void Unsubscribe(ChannelReader<SweepProgressUpdate> reader)
        {
            lock (_gate)
            {
                _watchers.RemoveAll(c => c.Reader == reader);
            }
        }

        public void Publish(SweepProgressUpdate update)
        {
            lock (_gate)
            {
                if (Done)
                {
                    return;
                }

                Latest = update;
                foreach (var watcher in _watchers)
                {
                    watcher.Writer.TryWrite(update.Clone());
                }
            }
        }

        public void Finish(SweepProgressUpdate update)
        {
            lock (_gate)
            {
                Latest = update;
                Done = true;
                foreach (var watcher in _watchers)
                {
                    watcher.Writer.TryWrite(update.Clone());
                    watcher.Writer.TryComplete();
                }

                _watchers.Clear();
            }
        }
    }

    /// <summary>Turns the runner's progress reports into updates.</summary>
    private sealed class Progress(SweepRun run) : IProgress<SweepProgress>
    {
        public void Report(SweepProgress value) => run.Publish(new SweepProgressUpdate
        {
            SweepId = run.SweepId,
            AtlasId = run.AtlasId,
            Stage = value.Stage,
            TilesDone = value.TilesDone,
            TilesPlanned = value.TilesTotal,
            Samples = value.Samples,
            Crossings = value.Crossings,
            TilesPerSecond = value.TilesPerSecond,
            EtaSeconds = value.Remaining?.TotalSeconds ?? -1,
        });
    }
}
