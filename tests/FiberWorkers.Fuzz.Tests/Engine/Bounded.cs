using System.Runtime.ExceptionServices;

namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>Runs one piece of work on a thread with the fuzz runner's 1 MiB stack and fails if it does not finish in time.</summary>
internal static class Bounded
{
    /// <summary>The bound for replaying one corpus file: generous, because a replay must not flake on a loaded machine, only never hang.</summary>
    public static readonly TimeSpan ReplayLimit = TimeSpan.FromSeconds(10);

    public static T Run<T>(Func<T> work, TimeSpan limit, string what)
    {
        ArgumentNullException.ThrowIfNull(work);
        var result = default(T);
        ExceptionDispatchInfo? error = null;
        var thread = new Thread(
            () =>
            {
                try
                {
                    result = work();
                }
                catch (Exception e)
                {
                    error = ExceptionDispatchInfo.Capture(e);
                }
            },
            1 << 20)
        { IsBackground = true, Name = what };
        thread.Start();
        if (!thread.Join(limit))
        {
            Assert.Fail($"{what} did not finish within {limit.TotalSeconds:F0} s");
        }

        error?.Throw();
        return result!;
    }
}
