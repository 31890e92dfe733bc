using FiberWorkers.Cluster.Contracts;
using FiberWorkers.Cluster.Coordination;
using Grpc.Core;

namespace FiberWorkers.Cluster.Tests.Limits;

/// <summary>The token bucket on a clock the test moves: refill at the configured rate, the wait it reports, the cap.</summary>
public sealed class QueryRateLimiterTests
{
    [Fact]
    public void Tokens_come_back_at_the_rate_up_to_the_burst_and_the_refusal_names_the_exact_wait()
    {
        var clock = new ManualClock();
        var limiter = new QueryRateLimiter(RequestLimits.Default with { QueryRate = 4, QueryBurst = 2 }, clock);

        limiter.Take("alice");
        limiter.Take("alice");
        var refusal = Assert.Throws<RpcException>(() => limiter.Take("alice"));
        Assert.Equal(StatusCode.ResourceExhausted, refusal.StatusCode);
        Assert.Equal("query rate limit of 4 per second (query-rate, burst 2) for alice exceeded; retry after ~250 ms", refusal.Status.Detail);

        // 100 ms give 0.4 of a token: still 150 ms to wait.
        clock.Advance(TimeSpan.FromMilliseconds(100));
        Assert.Contains("retry after ~150 ms", Assert.Throws<RpcException>(() => limiter.Take("alice")).Status.Detail, StringComparison.Ordinal);

        clock.Advance(TimeSpan.FromMilliseconds(150));
        limiter.Take("alice");

        // A long pause refills to the burst, not beyond: two queries, then a refusal.
        clock.Advance(TimeSpan.FromHours(1));
        limiter.Take("alice");
        limiter.Take("alice");
        Assert.Throws<RpcException>(() => limiter.Take("alice"));

        // Callers have buckets of their own.
        limiter.Take("bob");
        limiter.Take("bob");
    }

    [Fact]
    public void Buckets_of_idle_callers_are_dropped_once_there_are_many()
    {
        var clock = new ManualClock();
        var limiter = new QueryRateLimiter(RequestLimits.Default with { QueryRate = 1, QueryBurst = 1 }, clock);
        for (var i = 0; i <= QueryRateLimiter.PruneAbove; i++)
        {
            limiter.Take($"caller-{i}");
        }

        Assert.Equal(QueryRateLimiter.PruneAbove + 1, limiter.Callers);
        clock.Advance(TimeSpan.FromSeconds(2));
        limiter.Take("late");
        Assert.Equal(1, limiter.Callers);
    }

    private sealed class ManualClock : TimeProvider
    {
        private long _ticks;

        public override long TimestampFrequency => TimeSpan.TicksPerSecond;

        public override long GetTimestamp() => _ticks;

        public void Advance(TimeSpan by) => _ticks += by.Ticks;
    }
}
