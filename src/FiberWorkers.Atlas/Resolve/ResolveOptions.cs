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

    /// <summary>
    /// The fast path needs this many nearest samples to agree on the count: a query where the atlas's labels are
    /// mixed lies near the locus, where real-only tracking is blind to pairs turning real. Default 8.
    /// </summary>
    public int Unanimity { get; init; } = 8;

    /// <summary>
    /// The query may be at most this fraction of the start sample's distance to its nearest stored crossing away
    /// from it. Default 0.5.
    /// </summary>
    public double CrossingMargin { get; init; } = 0.5;

    /// <summary>Also solve in full and compare (the answer keeps the full solve's solutions). Default false.</summary>
    public bool VerifyFull { get; init; }
}
