using System.Collections.Concurrent;
using System.Diagnostics;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Randomness;
using Google.Protobuf;
using Grpc.Core;
using Microsoft.AspNetCore.Builder;
using Microsoft.Extensions.DependencyInjection;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// Measurements of the cluster path (<c>fiber bench cluster</c>, <c>fiber bench ask</c>): tile-phase time of the
/// embedded sweep and of a coordinator with one and two worker processes; the coordinator's own cost per tile against
/// workers that answer from precomputed results; routed ask latency under concurrent clients.
/// </summary>
internal static class ClusterBenchmark
{
    /// <summary>
    /// Tile-phase seconds summed over <see cref="Runs"/> rounds (seeds s, s+1, …) for each way of running a sweep, and
    /// each round's own figures; the embedded sweep on one thread is the machine's own scaling from one core to two,
    /// the reference for the workers'.
    /// </summary>
    public sealed record SweepTimes(double Embedded, double EmbeddedOneThread, double OneWorker, double TwoWorkers, int Tiles, int Runs, bool SameContent, IReadOnlyList<SweepRound> Rounds);

    /// <summary>One round: the same seed swept in each of the four ways, one right after the other.</summary>
    public sealed record SweepRound(ulong Seed, double Embedded, double EmbeddedOneThread, double OneWorker, double TwoWorkers)
    {
        /// <summary>Two worker processes against one.</summary>
        public double TwoOverOne => OneWorker / TwoWorkers;

        /// <summary>Two worker processes against the embedded sweep on two threads, as a fraction more time.</summary>
        public double ClusterOverhead => (TwoWorkers / Embedded) - 1;
    }

    /// <summary>
    /// Rounds timed. The four ways run interleaved, round by round in a rotating order, so a slow spell of the host
    /// (on the shared VMs measured here, ±20 % from one half-minute to the next) falls on all of them alike instead
    /// of on whichever ran then; each round's ratios compare sweeps seconds apart.
    /// </summary>
    public const int Runs = 5;

    /// <summary>
    /// Warm-up of each way before the rounds: sweeps at other seeds until this long has passed (and at least two).
    /// Fresh worker processes need more than one sweep: their first tiles run tier-0 and instrumented code, and on two
    /// busy cores the JIT's background thread competes with the tiles (measured 12-02 on the three-bus microgrid:
    /// second sweep 5.3 s, third and later 3.5–3.7 s; the same first sweep with tiering off 3.6 s).
    /// </summary>
    public static readonly TimeSpan WarmupTime = TimeSpan.FromSeconds(10);

    /// <summary>Seconds of the tile phase (from the first tile to the commit) for the ways of running a sweep.</summary>
    public static async Task<SweepTimes> SweepAsync(FamilyDefinition family, SweepOptions options, CancellationToken cancellation)
    {
        using var directory = new BenchDirectory();
        var embeddedRun = 0;
        (double Seconds, string Hash, int Tiles) Embedded(ulong seed, int threads)
        {
            using var store = SqliteAtlasStore.Open(directory.File($"embedded-{embeddedRun++}.db"));
            var phase = new PhaseClock();
            var summary = new SweepRunner(store).Run(family, options with { Seed = seed, MaxDegreeOfParallelism = threads }, phase, cancellation);
            return (phase.Seconds, summary.ContentHash, summary.Tiles);
        }

        await WarmAsync(cancellation, seed => Task.FromResult(Embedded(seed, 2))).ConfigureAwait(false);
        await using var one = await BenchCluster.StartAsync(1, directory.File("one.db"), cancellation).ConfigureAwait(false);
        await using var two = await BenchCluster.StartAsync(2, directory.File("two.db"), cancellation).ConfigureAwait(false);
        await WarmAsync(cancellation, seed => one.SweepAsync(family, options with { Seed = seed }, cancellation)).ConfigureAwait(false);
        await WarmAsync(cancellation, seed => two.SweepAsync(family, options with { Seed = seed }, cancellation)).ConfigureAwait(false);

        var ways = new Func<ulong, Task<(double Seconds, string Hash, int Tiles)>>[]
        {
            seed => Task.FromResult(Embedded(seed, 2)),
            seed => Task.FromResult(Embedded(seed, 1)),
            seed => one.SweepAsync(family, options with { Seed = seed }, cancellation),
            seed => two.SweepAsync(family, options with { Seed = seed }, cancellation),
        };
        var rounds = new List<SweepRound>();
        var same = true;
        var tiles = 0;
        for (var round = 0; round < Runs; round++)
        {
            var seed = options.Seed + (ulong)round;
            var seconds = new double[ways.Length];
            var hashes = new string[ways.Length];
            for (var k = 0; k < ways.Length; k++)
            {
                var way = (round + k) % ways.Length;
                (seconds[way], hashes[way], var count) = await ways[way](seed).ConfigureAwait(false);
                tiles = Math.Max(tiles, count);
            }

            same &= hashes.All(h => string.Equals(h, hashes[0], StringComparison.Ordinal));
            rounds.Add(new SweepRound(seed, seconds[0], seconds[1], seconds[2], seconds[3]));
        }

        return new SweepTimes(
            rounds.Sum(r => r.Embedded), rounds.Sum(r => r.EmbeddedOneThread), rounds.Sum(r => r.OneWorker), rounds.Sum(r => r.TwoWorkers), tiles, Runs, same, rounds);
    }

    /// <summary>Runs <paramref name="sweep"/> at seeds 1000, 1001, ... until <see cref="WarmupTime"/> has passed and at least two ran.</summary>
    private static async Task WarmAsync(CancellationToken cancellation, Func<ulong, Task> sweep)
    {
        var clock = Stopwatch.StartNew();
        for (ulong seed = 1000; seed < 1002 || clock.Elapsed < WarmupTime; seed++)
        {
            cancellation.ThrowIfCancellationRequested();
            await sweep(seed).ConfigureAwait(false);
        }
    }

    /// <summary>
    /// The coordinator's cost per tile: a sweep whose workers (in this process) answer every tile at once from results
    /// computed beforehand, so the time per tile is scheduling, the gRPC round trip, the checks and the merge.
    /// </summary>
    public static async Task<(double MicrosecondsPerTile, double CpuMicrosecondsPerTile, int Tiles)> CoordinatorCostAsync(
        FamilyDefinition family, SweepOptions options, CancellationToken cancellation)
    {
        using var directory = new BenchDirectory();
        var results = new ConcurrentDictionary<string, TileOutcome>(StringComparer.Ordinal);
        using (var store = SqliteAtlasStore.Open(directory.File("precomputed.db")))
        {
            var summary = new SweepRunner(store).Run(family, options, null, cancellation);
            foreach (var (key, tileHash) in store.VersionTiles(summary.AtlasId, summary.AtlasVersion))
            {
                results[key] = new TileOutcome { Result = TileResult.Parser.ParseFrom(store.Tile(tileHash).Payload), WorkerId = "replay" };
            }
        }

        using var log = new Serilog.LoggerConfiguration().CreateLogger();
        using var ledger = SqliteAtlasStore.Open(directory.File("cluster.db"));
        var listen = ListenAddress.Parse("127.0.0.1:0", "bench");
        var coordinator = await CoordinatorServer.StartAsync(ledger, CoordinatorOptions.Default, listen, log, cancellation).ConfigureAwait(false);
        await using (coordinator.ConfigureAwait(false))
        {
            var replay = await GrpcHost.StartAsync(
                new HostSettings { Listen = listen, Logger = log },
                services => services.AddSingleton(results),
                app => app.MapGrpcService<ReplayWorker>(),
                cancellation).ConfigureAwait(false);
            await using (replay.ConfigureAwait(false))
            {
                using var client = new ClusterClient(coordinator.Address);
                await client.Coordinator.RegisterWorkerAsync(new RegisterWorkerRequest { WorkerId = "replay", Address = replay.Address.ToString().TrimEnd('/'), Threads = 64 }, cancellationToken: cancellation);
                using var beat = new Timer(_ => client.Coordinator.Heartbeat(new HeartbeatRequest { WorkerId = "replay" }), null, TimeSpan.Zero, TimeSpan.FromMilliseconds(500));
                var phase = new PhaseClock();
                var cpu = Process.GetCurrentProcess().TotalProcessorTime;
                var outcome = await client.SweepAsync(ClusterRequest(family, options), new Relay(phase), cancellation).ConfigureAwait(false);
                var cpuSeconds = (Process.GetCurrentProcess().TotalProcessorTime - cpu).TotalSeconds;
                return (1e6 * phase.Seconds / outcome.Tiles, 1e6 * cpuSeconds / outcome.Tiles, outcome.Tiles);
            }
        }
    }

    /// <summary>Routed asks from <paramref name="clients"/> concurrent clients for <paramref name="seconds"/>.</summary>
    public static async Task<AskLoad> AskAsync(Uri coordinator, ClientSecurity security, string atlasId, int clients, double seconds, ulong seed, CancellationToken cancellation)
    {
        using var client = new ClusterClient(coordinator, security: security);
        var versions = await client.VersionsAsync(atlasId, cancellation).ConfigureAwait(false);
        if (versions.Count == 0)
        {
            throw new RpcException(new Status(StatusCode.NotFound, $"atlas '{atlasId}' has no committed version"));
        }

        var family = FamilyReader.Parse(versions[^1].FamilyJson, $"atlas {atlasId}");
        var random = new SeededRandom(seed);
        var points = Enumerable.Range(0, 4096).Select(_ => family.Parameters.Select(p => random.NextDouble(p.Low, p.High)).ToArray()).ToArray();

        // Warm every shard once so the figures are of steady state, not of the first loads.
        foreach (var point in points.Take(512))
        {
            var warm = new AskRequest { AtlasId = atlasId };
            warm.Point.Add(point);
            await client.AskAsync(warm, cancellation).ConfigureAwait(false);
        }

        var latencies = new ConcurrentBag<double>();
        var methods = new ConcurrentDictionary<string, int>(StringComparer.Ordinal);
        var refused = 0;
        var failed = 0;
        var stop = Stopwatch.StartNew();
        await Task.WhenAll(Enumerable.Range(0, clients).Select(c => Task.Run(
            async () =>
            {
                using var own = new ClusterClient(coordinator, security: security);
                for (var i = c; stop.Elapsed.TotalSeconds < seconds; i += clients)
                {
                    var ask = new AskRequest { AtlasId = atlasId, RequestId = $"{c}-{i}" };
                    ask.Point.Add(points[i % points.Length]);
                    var clock = Stopwatch.StartNew();
                    try
                    {
                        var reply = await own.AskAsync(ask, cancellation).ConfigureAwait(false);
                        latencies.Add(clock.Elapsed.TotalMicroseconds);
                        methods.AddOrUpdate(reply.Method, 1, (_, n) => n + 1);
                    }
                    catch (RpcException e) when (e.StatusCode == StatusCode.ResourceExhausted)
                    {
                        Interlocked.Increment(ref refused);
                    }
                    catch (RpcException)
                    {
                        Interlocked.Increment(ref failed);
                    }
                }
            },
            cancellation))).ConfigureAwait(false);
        var elapsed = stop.Elapsed.TotalSeconds;
        var sorted = latencies.Order().ToArray();
        double Quantile(double q) => sorted.Length == 0 ? double.NaN : sorted[(int)Math.Round(q * (sorted.Length - 1))];
        return new AskLoad(sorted.Length, refused, failed, sorted.Length / elapsed, Quantile(0.5), Quantile(0.99), methods.ToDictionary(m => m.Key, m => m.Value));
    }

    public sealed record AskLoad(int Answered, int Refused, int Failed, double PerSecond, double P50Microseconds, double P99Microseconds, IReadOnlyDictionary<string, int> Methods);

    private static SubmitSweepRequest ClusterRequest(FamilyDefinition family, SweepOptions options) => new()
    {
        FamilyJson = JsonFormatter.Default.Format(family.Message),
        Settings = Conversions.ToSettings(options),
        Source = family.Name,
    };

    /// <summary>A coordinator (in this process) with worker processes of its own, kept for every round.</summary>
    private sealed class BenchCluster : IAsyncDisposable
    {
        private readonly SqliteAtlasStore _ledger;
        private readonly CoordinatorServer _coordinator;
        private readonly List<Process> _processes;
        private readonly ClusterClient _client;

        private BenchCluster(SqliteAtlasStore ledger, CoordinatorServer coordinator, List<Process> processes)
        {
            _ledger = ledger;
            _coordinator = coordinator;
            _processes = processes;
            _client = new ClusterClient(coordinator.Address);
        }

        public static async Task<BenchCluster> StartAsync(int workers, string file, CancellationToken cancellation)
        {
            var ledger = SqliteAtlasStore.Open(file);
            var listen = ListenAddress.Parse("127.0.0.1:0", "bench");
            var coordinator = await CoordinatorServer.StartAsync(ledger, CoordinatorOptions.Default, listen, Serilog.Core.Logger.None, cancellation).ConfigureAwait(false);
            var cluster = new BenchCluster(ledger, coordinator, [.. Enumerable.Range(0, workers).Select(i => StartWorker(coordinator.Address, $"bench-{workers}-{i}"))]);
            try
            {
                var deadline = Stopwatch.StartNew();
                while ((await cluster._client.Coordinator.ListWorkersAsync(new ListWorkersRequest(), cancellationToken: cancellation)).Workers.Count < workers)
                {
                    if (deadline.Elapsed > TimeSpan.FromSeconds(60) || cluster._processes.Any(p => p.HasExited))
                    {
                        throw new InvalidOperationException("the benchmark's worker processes did not register within 60 s");
                    }

                    await Task.Delay(50, cancellation).ConfigureAwait(false);
                }

                return cluster;
            }
            catch
            {
                await cluster.DisposeAsync().ConfigureAwait(false);
                throw;
            }
        }

        /// <summary>One sweep through the coordinator: its tile phase, content hash and tiles.</summary>
        public async Task<(double Seconds, string Hash, int Tiles)> SweepAsync(FamilyDefinition family, SweepOptions options, CancellationToken cancellation)
        {
            var phase = new PhaseClock();
            var outcome = await _client.SweepAsync(ClusterRequest(family, options), new Relay(phase), cancellation).ConfigureAwait(false);
            return (phase.Seconds, outcome.ContentHash, outcome.Tiles);
        }

        public async ValueTask DisposeAsync()
        {
            foreach (var process in _processes)
            {
                if (!process.HasExited)
                {
                    process.Kill(entireProcessTree: true);
                }

                await process.WaitForExitAsync().ConfigureAwait(false);
                process.Dispose();
            }

            _client.Dispose();
            await _coordinator.DisposeAsync().ConfigureAwait(false);
            _ledger.Dispose();
        }
    }

    /// <summary>A worker process running this same executable.</summary>
    private static Process StartWorker(Uri coordinator, string id)
    {
        var path = Environment.ProcessPath ?? throw new InvalidOperationException("the executable's path is unknown");
        var start = new ProcessStartInfo(path) { UseShellExecute = false, RedirectStandardOutput = true, RedirectStandardError = true };
        if (Path.GetFileNameWithoutExtension(path) == "dotnet")
        {
            start.ArgumentList.Add(typeof(ClusterBenchmark).Assembly.Location);
        }

        foreach (var argument in new[] { "serve", "worker", "--listen", "127.0.0.1:0", "--coordinator", coordinator.ToString().TrimEnd('/'), "--threads", "1", "--id", id, "--log-format", "json", "--plaintext" })
        {
            start.ArgumentList.Add(argument);
        }

        var process = Process.Start(start)!;
        process.OutputDataReceived += (_, _) => { };
        process.ErrorDataReceived += (_, _) => { };
        process.BeginOutputReadLine();
        process.BeginErrorReadLine();
        return process;
    }

    /// <summary>Times from the first tile report of level 0 to the end of the sweep.</summary>
    private sealed class PhaseClock : IProgress<SweepProgress>
    {
        private readonly Stopwatch _clock = new();

        public double Seconds => _clock.Elapsed.TotalSeconds;

        public void Report(SweepProgress value)
        {
            if (value.Stage.StartsWith("level", StringComparison.Ordinal) && !_clock.IsRunning)
            {
                _clock.Start();
            }

            if (value.Stage == "commit")
            {
                _clock.Stop();
            }
        }
    }

    private sealed class Relay(PhaseClock clock) : IProgress<SweepProgressUpdate>
    {
        public void Report(SweepProgressUpdate value) =>
            clock.Report(new SweepProgress(value.Stage, value.TilesDone, value.TilesPlanned, value.Samples, value.Crossings, value.TilesPerSecond, null));
    }

    /// <summary>A worker that answers tiles from results computed beforehand (no computation).</summary>
    private sealed class ReplayWorker(ConcurrentDictionary<string, TileOutcome> results) : Worker.WorkerBase
    {
        public override Task<TileOutcome> RunTile(TileTask request, ServerCallContext context) =>
            results.TryGetValue(request.TileKey, out var outcome)
                ? Task.FromResult(outcome)
                : throw new RpcException(new Status(StatusCode.NotFound, $"no precomputed result for {request.TileKey}"));
    }

    private sealed class BenchDirectory : IDisposable
    {
        private readonly string _path = Directory.CreateTempSubdirectory("fiber-bench-").FullName;

        public string File(string name) => Path.Combine(_path, name);

        public void Dispose()
        {
            try
            {
                Directory.Delete(_path, recursive: true);
            }
            catch (IOException)
            {
                // Temp is cleaned by the OS.
            }
        }
    }
}
