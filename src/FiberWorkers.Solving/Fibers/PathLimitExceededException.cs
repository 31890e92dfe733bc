namespace FiberWorkers.Solving.Fibers;

/// <summary>A total-degree solve would track more paths than <see cref="SolveOptions.MaxPaths"/> allows.</summary>
public sealed class PathLimitExceededException(string paths, long limit)
    : Exception($"a total-degree solve would track {paths} paths (the Bézout number), above the limit of {limit}; "
        + "solve a start fiber once and use the parameter homotopy, or use monodromy")
{
    /// <summary>The Bézout number, as text (it may not fit in 64 bits).</summary>
    public string Paths { get; } = paths;

    /// <summary>The limit in force.</summary>
    public long Limit { get; } = limit;
}
