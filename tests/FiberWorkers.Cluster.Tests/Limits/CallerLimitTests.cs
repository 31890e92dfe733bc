using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Testing;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Limits;

/// <summary>
/// The per-caller limits through a real coordinator without workers (accepted sweeps wait, so they stay running;
/// without tokens each client channel is its own caller): concurrent sweeps, and the query rate with a burst of
/// three and a refill so slow that no token comes back during the test.
/// </summary>
public sealed class CallerLimitTests : IAsyncLifetime
{
    private static readonly RequestLimits Limits = RequestLimits.Default with { MaxConcurrentSweeps = 2, QueryRate = 0.001, QueryBurst = 3 };

    private static readonly string Family = TestFamilies.Json("line", ["x"], ["x - P"], [("P", -1, 1)]);

    private LimitCluster _cluster = null!;

    public async Task InitializeAsync() => _cluster = await LimitCluster.StartAsync(CoordinatorOptions.Default with { Limits = Limits });

    public async Task DisposeAsync() => await _cluster.DisposeAsync();

    [Fact]
    public async Task A_caller_may_run_two_sweeps_at_once_a_third_is_refused_joining_is_not_counted_and_other_callers_are_not_affected()
    {
        var alice = _cluster.Client();
        var first = await alice.SubmitSweepAsync(LimitCluster.Sweep(Family, [2], seed: 1));
        var second = await alice.SubmitSweepAsync(LimitCluster.Sweep(Family, [2], seed: 2));
        Assert.True(first.Started && second.Started);
        Assert.Equal(2, _cluster.Coordinator.Sweeps.Running);

        var refusal = await LimitCluster.Refused(StatusCode.ResourceExhausted, () => alice.SubmitSweepAsync(LimitCluster.Sweep(Family, [2], seed: 3)).ResponseAsync,
            "already has 2 sweeps running, the limit max-concurrent-sweeps = 2");
        Assert.StartsWith("sweep: ipv4:127.0.0.1:", refusal.Status.Detail, StringComparison.Ordinal);

        // Submitting a running sweep again joins it: no new work, so no refusal.
        var joined = await alice.SubmitSweepAsync(LimitCluster.Sweep(Family, [2], seed: 1));
        Assert.Equal(first.SweepId, joined.SweepId);
        Assert.False(joined.Started);

        var bob = _cluster.Client();
        var third = await bob.SubmitSweepAsync(LimitCluster.Sweep(Family, [2], seed: 3));
        Assert.True(third.Started);
        Assert.Equal(3, _cluster.Coordinator.Sweeps.Running);
    }

    [Fact]
    public async Task A_caller_gets_its_burst_of_queries_then_ResourceExhausted_naming_the_rate_and_the_wait_while_others_go_on()
    {
        var alice = _cluster.Client();
        for (var i = 0; i < 3; i++)
        {
            Assert.Empty((await alice.ListVersionsAsync(new ListVersionsRequest())).Versions);
        }

        var refusal = await LimitCluster.Refused(StatusCode.ResourceExhausted, () => alice.ListVersionsAsync(new ListVersionsRequest()).ResponseAsync,
            "query rate limit of 0.001 per second (query-rate, burst 3) for ipv4:127.0.0.1:", "exceeded; retry after ~");

        // One token takes 1000 s at this rate; the wait reported is that, less the moments the test has run.
        var wait = double.Parse(refusal.Status.Detail.Split('~')[1].Split(' ')[0], System.Globalization.CultureInfo.InvariantCulture);
        Assert.InRange(wait, 900_000, 1_000_000);

        // Every query counts against the same bucket, refused before the atlas is looked up (else NotFound).
        await LimitCluster.Refused(StatusCode.ResourceExhausted, () => alice.AskAsync(new AskRequest { AtlasId = "a0123456789abcde", Point = { 0.5 } }).ResponseAsync, "query-rate");
        await LimitCluster.Refused(StatusCode.ResourceExhausted, () => alice.FetchShardAsync(new ShardRequest { AtlasId = "a0123456789abcde", TileKey = "L0:0" }).ResponseAsync, "query-rate");

        // Sweeps and other callers are not held back.
        Assert.True((await alice.SubmitSweepAsync(LimitCluster.Sweep(Family, [2]))).SweepId > 0);
        var bob = _cluster.Client();
        await LimitCluster.Refused(StatusCode.NotFound, () => bob.AskAsync(new AskRequest { AtlasId = "a0123456789abcde", Point = { 0.5 } }).ResponseAsync, "a0123456789abcde");
    }
}
