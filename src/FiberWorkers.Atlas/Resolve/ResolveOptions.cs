namespace FiberWorkers.Atlas.Resolve;

/// <summary>Settings of point queries against an atlas.</summary>
public sealed record ResolveOptions
{
    /// <summary>The defaults.</summary>
    public static ResolveOptions Default { get; } = new();

    /// <summary>Nearest solved samples tried before falling back to a full solve. Default 3.</summary>
    public int Attempts { get; init; } = 3;

    /// <summary>
    /// A stored crossing vetoes a start sample when the segment to the query passes within this distance of it
    /// (box-normalized) on opposite sides of its locus tangent plane. Default 0.02.
    /// </summary>
    public double CrossingReach { get; init; } = 0.02;

    /// <summary>Also solve in full and compare (the answer keeps the full solve's solutions). Default false.</summary>
    public bool VerifyFull { get; init; }
}
