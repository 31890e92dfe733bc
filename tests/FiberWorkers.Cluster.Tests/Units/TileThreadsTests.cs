using FiberWorkers.Cluster.Workers;

namespace FiberWorkers.Cluster.Tests.Units;

public sealed class TileThreadsTests
{
    [Fact]
    public async Task Work_runs_on_the_same_long_lived_named_threads_one_after_another()
    {
        using var threads = new TileThreads(1, "tile-test");
        var first = await threads.RunAsync(() => (Environment.CurrentManagedThreadId, Thread.CurrentThread.Name, Thread.CurrentThread.IsThreadPoolThread), CancellationToken.None);
        var second = await threads.RunAsync(() => Environment.CurrentManagedThreadId, CancellationToken.None);

        Assert.Equal("tile-test-0", first.Name);
        Assert.False(first.IsThreadPoolThread);
        Assert.Equal(first.CurrentManagedThreadId, second);
        Assert.NotEqual(Environment.CurrentManagedThreadId, second);
    }

    [Fact]
    public async Task Two_threads_run_two_computations_at_once()
    {
        using var threads = new TileThreads(2, "tile-test");
        using var both = new Barrier(2);

        // Each waits for the other: with only one thread running them, the barrier would time out.
        var a = threads.RunAsync(() => both.SignalAndWait(TimeSpan.FromSeconds(10)), CancellationToken.None);
        var b = threads.RunAsync(() => both.SignalAndWait(TimeSpan.FromSeconds(10)), CancellationToken.None);

        var met = await Task.WhenAll(a, b);
        Assert.All(met, Assert.True);
    }

    [Fact]
    public async Task A_computation_cancelled_before_it_starts_is_skipped_and_failures_reach_the_caller()
    {
        using var threads = new TileThreads(1, "tile-test");
        using var release = new ManualResetEventSlim();
        using var cancel = new CancellationTokenSource();
        var ran = 0;
        var blocking = threads.RunAsync(() => release.Wait(TimeSpan.FromSeconds(10)), CancellationToken.None);
        var queued = threads.RunAsync(() => Interlocked.Increment(ref ran), cancel.Token);
        await cancel.CancelAsync();
        release.Set();

        Assert.True(await blocking);
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => queued);
        Assert.Equal(0, ran);

        var failing = threads.RunAsync<int>(() => throw new InvalidOperationException("tile failed"), CancellationToken.None);
        var error = await Assert.ThrowsAsync<InvalidOperationException>(() => failing);
        Assert.Equal("tile failed", error.Message);

        // The thread survives a failure and runs the next computation.
        Assert.Equal(7, await threads.RunAsync(() => 7, CancellationToken.None));
    }
}
