using FiberWorkers.Solving.Fibers;

namespace FiberWorkers.Atlas.Resolve;

/// <summary>The answer to one point query.</summary>
public sealed record ResolveAnswer
{
    /// <summary><c>real-track</c> (only the real solutions, tracked from a solved sample) or <c>full</c>.</summary>
    public required string Method { get; init; }

    /// <summary>The number of real solutions.</summary>
    public required int RealCount { get; init; }

    /// <summary>True when every real solution is a certified, distinct, real approximate zero and, for full solves, the count is certified.</summary>
    public required bool Certified { get; init; }

    /// <summary>The atlas version the answer used.</summary>
    public required int AtlasVersion { get; init; }

    /// <summary>The real solutions, certified at the query point.</summary>
    public required IReadOnlyList<FiberPoint> Solutions { get; init; }

    /// <summary>The classifier's label at the query point.</summary>
    public required int PredictedLabel { get; init; }

    /// <summary>True when the point lies outside the atlas's box (then it is always solved in full).</summary>
    public bool OutsideBox { get; init; }

    /// <summary>
    /// Where the answer's paths started: the sample real-only tracking started from, or for a full solve the fiber the
    /// parameter homotopy started from (the relay fiber of the point's cell, or the family's start fiber).
    /// </summary>
    public string? StartSample { get; init; }

    /// <summary>Why each rejected attempt was rejected, in order (empty when the first attempt was accepted).</summary>
    public IReadOnlyList<string> Rejections { get; init; } = [];

    /// <summary>With --verify full: whether the real-only answer agreed with the full solve (null when not checked).</summary>
    public bool? Verified { get; init; }

    /// <summary>Paths tracked to answer.</summary>
    public int PathsTracked { get; init; }
}
