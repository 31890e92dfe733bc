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
    /// Nearest samples looked at around a query: the highest count among them is tried first, a neighbour with the
    /// count that survives a fold answers from the other side, and where all agree each is a candidate start (those
    /// too far for <see cref="CrossingMargin"/> are passed over without tracking). Default 12 (8 left a tenth of the
    /// four-bus queries to full solves, 12 about 8 %, 16 about 6 % at a higher cost per answer).
    /// </summary>
    public int Neighbourhood { get; init; } = 12;

    /// <summary>
    /// When real-only tracking from a start sample with the neighbourhood's highest count runs into a fold, track its
    /// real solutions again around the fold through complex parameters and accept what arrives real, once a neighbour
    /// with that count reaches the same solutions from its own side. Default true; false answers such queries by a
    /// full solve.
    /// </summary>
    public bool TwoSided { get; init; } = true;

    /// <summary>
    /// A count is carried from a start sample only to queries at most this fraction of the sample's distance to its
    /// nearest stored crossing away: farther, a part of the locus the atlas has not sampled may lie in between.
    /// Default 0.5.
    /// </summary>
    public double CrossingMargin { get; init; } = 0.5;

    /// <summary>
    /// Full solves of points inside the box start from a relay fiber: the complete fiber at a complex point near the
    /// centre of the point's cell, on a grid of this many cells per axis over the box (each computed once, on first
    /// use, from the family's start fiber; at most 4,096 cells). Shorter paths, the same N of them. Default 4 (on the
    /// four-bus microgrid 6 and 8 cost more than they saved over 2,000 queries, most cells being computed for few of
    /// them); 0 solves from the family's start fiber.
    /// </summary>
    public int RelayDivisions { get; init; } = 4;

    /// <summary>Also solve in full and compare (the answer keeps the full solve's solutions). Default false.</summary>
    public bool VerifyFull { get; init; }
}
