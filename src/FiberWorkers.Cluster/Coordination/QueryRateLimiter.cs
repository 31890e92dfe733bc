using System.Collections.Concurrent;
using System.Globalization;
using FiberWorkers.Cluster.Contracts;
using Grpc.Core;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>
/// A token bucket per caller for the coordinator's queries (Ask, ListVersions, FetchShard): each caller starts with
/// <see cref="RequestLimits.QueryBurst"/> tokens, a query takes one, and tokens come back at
/// <see cref="RequestLimits.QueryRate"/> per second up to the burst. A query without a token is refused at once with
/// ResourceExhausted and the time until the next token. Written here rather than with System.Threading.RateLimiting
/// so that rates below one per second are exact, the wait is computed rather than polled, and time comes from a
/// <see cref="TimeProvider"/>. Thread-safe; buckets of idle callers (full again) are dropped once there are many.
/// </summary>
public sealed class QueryRateLimiter
{
    /// <summary>Buckets kept before full ones are dropped (a full bucket is the same as a new one).</summary>
    internal const int PruneAbove = 10_000;

    private readonly ConcurrentDictionary<string, Bucket> _buckets = new(StringComparer.Ordinal);
    private readonly TimeProvider _clock;
    private readonly double _rate;
    private readonly double _burst;
    private long _pruned;

    public QueryRateLimiter(RequestLimits limits, TimeProvider? clock = null)
    {
        ArgumentNullException.ThrowIfNull(limits);
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(limits.QueryRate);
        ArgumentOutOfRangeException.ThrowIfLessThan(limits.QueryBurst, 1);
        _clock = clock ?? TimeProvider.System;
        _rate = limits.QueryRate;
        _burst = limits.QueryBurst;
    }

    /// <summary>Callers with a bucket.</summary>
    internal int Callers => _buckets.Count;

    /// <summary>Takes a token for <paramref name="caller"/> or throws ResourceExhausted naming the limit and the wait.</summary>
    public void Take(string caller)
    {
        ArgumentNullException.ThrowIfNull(caller);
        var now = _clock.GetTimestamp();
        if (_buckets.Count > PruneAbove && _clock.GetElapsedTime(Interlocked.Read(ref _pruned), now) >= TimeSpan.FromSeconds(1))
        {
            // At most once a second: many distinct callers must not make every query walk every bucket.
            Interlocked.Exchange(ref _pruned, now);
            Prune(now);
        }

        var bucket = _buckets.GetOrAdd(caller, _ => new Bucket(_burst, now));
        double missing;
        lock (bucket)
        {
            var refilled = Math.Min(_burst, bucket.Tokens + (_clock.GetElapsedTime(bucket.Stamp, now).TotalSeconds * _rate));
            bucket.Stamp = now;
            if (refilled >= 1)
            {
                bucket.Tokens = refilled - 1;
                return;
            }

            bucket.Tokens = refilled;
            missing = 1 - refilled;
        }

        var wait = Math.Max(1, Math.Ceiling(missing / _rate * 1000));
        throw new RpcException(new Status(
            StatusCode.ResourceExhausted,
            string.Create(
                CultureInfo.InvariantCulture,
                $"query rate limit of {_rate:G} per second (query-rate, burst {_burst:G}) for {caller} exceeded; retry after ~{wait:F0} ms")));
    }

    private void Prune(long now)
    {
        foreach (var (key, bucket) in _buckets)
        {
            lock (bucket)
            {
                if (bucket.Tokens + (_clock.GetElapsedTime(bucket.Stamp, now).TotalSeconds * _rate) >= _burst)
                {
                    _buckets.TryRemove(key, out _);
                }
            }
        }
    }

    private sealed class Bucket(double tokens, long stamp)
    {
        public double Tokens { get; set; } = tokens;

        public long Stamp { get; set; } = stamp;
    }
}
