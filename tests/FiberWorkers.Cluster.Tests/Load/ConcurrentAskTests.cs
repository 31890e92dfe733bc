using System.Collections.Concurrent;
using System.Diagnostics;
using FiberWorkers.Atlas.Resolve;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Tests.Support;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Randomness;
using Grpc.Core;
using Xunit.Abstractions;

namespace FiberWorkers.Cluster.Tests.Load;

public sealed class ConcurrentAskTests(ITestOutputHelper output)
{
    /// <summary>Seconds the load runs (FIBER_LOAD_SECONDS; 30 by default, as the cluster issue asks).</summary>
    private static int Seconds => int.TryParse(Environment.GetEnvironmentVariable("FIBER_LOAD_SECONDS"), out var s) && s > 0 ? s : 30;

    [Fact]
    public async Task Sixty_four_clients_asking_for_thirty_seconds_get_every_answer_once_and_right_or_a_quick_refusal()
    {
        using var directory = new TempDirectory();
        var db = directory.File("cluster.db");
        using var coordinator = ServerProcess.Coordinator($"sqlite:{db}", extra: ["--heartbeat", "0.5", "--ask-queue", "48"]);
        using var worker1 = ServerProcess.Worker(coordinator.Address, "w1", threads: 1, extra: ["--resolve-queue", "24"]);
        using var worker2 = ServerProcess.Worker(coordinator.Address, "w2", threads: 1, extra: ["--resolve-queue", "24"]);
        using var client = new ClusterClient(coordinator.Address);
        await ClusterScenario.WaitUntil(async () => (await ClusterScenario.Workers(client)).Count == 2, TimeSpan.FromSeconds(30), "two workers to register");
        var outcome = await client.SweepAsync(ClusterScenario.Request()).WaitAsync(TimeSpan.FromSeconds(180));

        // Reference answers: full solves in this process at 200 points of the box (the real count does not depend
        // on how it was found; the resolve must agree with the full solve).
        var family = ClusterScenario.Family;
        var random = new SeededRandom(2024);
        var points = Enumerable.Range(0, 200)
            .Select(_ => family.Parameters.Select(p => p.Low + (p.Width * random.NextDouble())).ToArray())
            .ToArray();
        int[] expected;
        using (var store = SqliteAtlasStore.Open(db))
        {
            var snapshot = AtlasSnapshot.Load(store, "cluster.db");
            var resolver = AtlasResolver.Create(store, snapshot);
            expected = [.. points.Select(p => resolver.SolveFull(p).RealCount)];
        }

        var answers = new ConcurrentDictionary<string, int>(StringComparer.Ordinal);
        var refusals = 0;
        var wrong = new ConcurrentBag<string>();
        var errors = new ConcurrentBag<string>();
        var refusalMicros = new ConcurrentBag<double>();
        var sent = 0;
        var stop = DateTime.UtcNow.AddSeconds(Seconds);
        var clients = Enumerable.Range(0, 64).Select(c => Task.Run(async () =>
        {
            using var own = new ClusterClient(coordinator.Address);
            for (var i = 0; DateTime.UtcNow < stop; i++)
            {
                var id = $"c{c}-{i}";
                var index = ((c * 7919) + i) % points.Length;
                var request = new AskRequest { AtlasId = outcome.AtlasId, RequestId = id };
                request.Point.Add(points[index]);
                Interlocked.Increment(ref sent);
                var clock = Stopwatch.StartNew();
                try
                {
                    var reply = await own.AskAsync(request);
                    if (reply.RequestId != id)
                    {
                        wrong.Add($"{id} answered as {reply.RequestId}");
                    }
                    else if (!answers.TryAdd(id, reply.RealCount))
                    {
                        wrong.Add($"{id} answered twice");
                    }
                    else if (reply.RealCount != expected[index])
                    {
                        wrong.Add($"{id} at point {index}: {reply.RealCount} real ({reply.Method}), full solve {expected[index]}");
                    }
                }
                catch (RpcException e) when (e.StatusCode == StatusCode.ResourceExhausted)
                {
                    Interlocked.Increment(ref refusals);
                    refusalMicros.Add(clock.Elapsed.TotalMicroseconds);
                }
                catch (RpcException e)
                {
                    errors.Add($"{id}: {e.StatusCode} {e.Status.Detail}");
                }
            }
        })).ToArray();
        await Task.WhenAll(clients).WaitAsync(TimeSpan.FromSeconds(Seconds + 120));

        output.WriteLine($"{sent} asks in {Seconds} s: {answers.Count} answered ({answers.Count / (double)Seconds:F0}/s), {refusals} refused");
        if (!refusalMicros.IsEmpty)
        {
            var sorted = refusalMicros.Order().ToArray();
            output.WriteLine($"refusals: median {sorted[sorted.Length / 2]:F0} µs, p99 {sorted[(int)(0.99 * (sorted.Length - 1))]:F0} µs");
        }

        Assert.Empty(errors);
        Assert.Empty(wrong);
        Assert.Equal(sent, answers.Count + refusals);
        Assert.True(answers.Count > 1000, $"only {answers.Count} answers in {Seconds} s");
    }
}
