namespace FiberWorkers.Testing;

/// <summary>
/// Measures what a piece of code allocates on the calling thread. The runtime itself may allocate on the thread
/// now and then (tiered compilation switching a loop to optimised code, a first-time stub), so one round can show
/// a few kilobytes that do not belong to the code; a real per-call allocation shows in every round. The fewest
/// bytes over several rounds is therefore the figure to assert on.
/// </summary>
public static class Allocations
{
    /// <summary>Runs <paramref name="round"/> <paramref name="rounds"/> times and returns the fewest bytes one round allocated.</summary>
    public static long FewestBytes(Action round, int rounds = 5)
    {
        ArgumentNullException.ThrowIfNull(round);
        ArgumentOutOfRangeException.ThrowIfLessThan(rounds, 1);
        var fewest = long.MaxValue;
        for (var r = 0; r < rounds; r++)
        {
            var before = GC.GetAllocatedBytesForCurrentThread();
            round();
            fewest = Math.Min(fewest, GC.GetAllocatedBytesForCurrentThread() - before);
        }

        return fewest;
    }
}
