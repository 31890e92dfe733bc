namespace FiberWorkers.Solving.Monodromy;

/// <summary>Settings of a monodromy solve (Duff, Hill, Jensen, Lee, Leykin &amp; Sommars 2019).</summary>
public sealed record MonodromyOptions
{
    /// <summary>The defaults.</summary>
    public static MonodromyOptions Default { get; } = new();

    /// <summary>
    /// Stop after this many loops in a row have found no new solution (four times as many while the trace test
    /// fails). Default 4.
    /// </summary>
    public int StallLoops { get; init; } = 4;

    /// <summary>Most loops in all. Default 200.</summary>
    public int MaxLoops { get; init; } = 200;

    /// <summary>Stop as soon as this many solutions are known (for example the family's rootCount). Default none.</summary>
    public int? ExpectedRootCount { get; init; }

    /// <summary>Run the trace test on the fiber found. Default true.</summary>
    public bool TraceTest { get; init; } = true;

    /// <summary>
    /// Place the first solution in a fiber of the family itself where its equations allow it (parameter-free
    /// equations with an irreducible solution set, the others affine-linear in the parameters: see
    /// <c>FiberPlacement</c>), instead of adding auxiliary constants to every equation. Default true; false always
    /// augments (for comparisons).
    /// </summary>
    public bool OwnFiberPlacement { get; init; } = true;

    /// <summary>Relative tolerance of the trace test's linearity check. Default 1e-7.</summary>
    public double TraceTolerance { get; init; } = 1e-7;
}
