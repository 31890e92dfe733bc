using System.Collections.Concurrent;

namespace FiberWorkers.Cluster.Workers;

/// <summary>
/// A worker's tile threads: a fixed set of long-lived background threads that run tile computations one at a time
/// each, off the thread pool (so heartbeats and resolves keep flowing while every tile thread is busy).
/// </summary>
/// <remarks>
/// Long-lived rather than one new thread a tile: with two worker processes on two cores, a fresh thread per tile
/// starts wherever the scheduler puts it, often next to the other process's tile thread, and shares that core until
/// the load balancer moves it. Measured 12-04 on the three-bus benchmark (tiles of 15–30 ms): the workers' tile
/// time summed over a sweep was 16 % more with two workers than with one. Threads that stay keep their core.
/// </remarks>
public sealed class TileThreads : IDisposable
{
    private readonly BlockingCollection<Action> _work = new();
    private readonly Thread[] _threads;

    /// <summary>Starts <paramref name="count"/> threads named <paramref name="name"/>-0, -1, ….</summary>
    public TileThreads(int count, string name)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(count, 1);
        _threads = new Thread[count];
        for (var k = 0; k < count; k++)
        {
            _threads[k] = new Thread(Drain) { IsBackground = true, Name = $"{name}-{k}" };
            _threads[k].Start();
        }
    }

    /// <summary>
    /// Runs <paramref name="compute"/> on the next free tile thread; a computation not yet started when
    /// <paramref name="cancellation"/> fires is skipped and its task cancelled.
    /// </summary>
    public Task<T> RunAsync<T>(Func<T> compute, CancellationToken cancellation)
    {
        ArgumentNullException.ThrowIfNull(compute);
        var done = new TaskCompletionSource<T>(TaskCreationOptions.RunContinuationsAsynchronously);
        _work.Add(() =>
        {
            if (cancellation.IsCancellationRequested)
            {
                done.TrySetCanceled(cancellation);
                return;
            }

            try
            {
                done.TrySetResult(compute());
            }
            catch (OperationCanceledException e)
            {
                done.TrySetCanceled(e.CancellationToken);
            }
            catch (Exception e)
            {
                done.TrySetException(e);
            }
        });
        return done.Task;
    }

    /// <summary>
    /// Lets every thread finish the work queued and end, waiting up to <see cref="JoinTimeout"/> for each (a tile
    /// stops between lines once its call is cancelled; one still running after that is left to end on its own, in
    /// the background, and the queue is then not disposed under it).
    /// </summary>
    public void Dispose()
    {
        _work.CompleteAdding();
        var ended = true;
        foreach (var thread in _threads)
        {
            ended &= thread.Join(JoinTimeout);
        }

        if (ended)
        {
            _work.Dispose();
        }
    }

    /// <summary>How long <see cref="Dispose"/> waits for each thread.</summary>
    public static readonly TimeSpan JoinTimeout = TimeSpan.FromSeconds(30);

    private void Drain()
    {
        foreach (var item in _work.GetConsumingEnumerable())
        {
            item();
        }
    }
}
