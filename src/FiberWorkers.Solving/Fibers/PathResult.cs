using System.Numerics;

namespace FiberWorkers.Solving.Fibers;

/// <summary>The end of one tracked path.</summary>
public sealed record PathResult
{
    /// <summary>Index of the path among the start solutions.</summary>
    public required int Index { get; init; }

    /// <summary>How the path ended.</summary>
    public required PathStatus Status { get; init; }

    /// <summary>Why it failed, or <see cref="PathFailure.None"/>.</summary>
    public PathFailure Failure { get; init; }

    /// <summary>The endpoint in affine coordinates (finite endpoints), or null.</summary>
    public Complex[]? Endpoint { get; init; }

    /// <summary>The endpoint in homogeneous coordinates for projective tracking (X₀ first), or null.</summary>
    public Complex[]? HomogeneousEndpoint { get; init; }

    /// <summary>Accepted predictor–corrector steps, endgame included.</summary>
    public int Steps { get; init; }

    /// <summary>Rejected steps.</summary>
    public int Rejections { get; init; }

    /// <summary>Winding (cycle) number found by the endgame; 1 when the path finished directly.</summary>
    public int CycleNumber { get; init; } = 1;

    /// <summary>‖F(x; p)‖∞ at the (refined) endpoint, when finite.</summary>
    public double Residual { get; init; } = double.NaN;

    /// <summary>Estimate of κ₁(∂F/∂x) at the endpoint.</summary>
    public double Condition { get; init; } = double.NaN;

    /// <summary>How far along the path (t) tracking got before failing; 1 for finished paths.</summary>
    public double Reached { get; init; } = 1;

    /// <summary>True when the path was tracked a second time with tighter settings.</summary>
    public bool Retracked { get; init; }

    /// <summary>
    /// True when <see cref="PathStatus.AtInfinity"/> rests only on the decay of the homogenizing coordinate (not on
    /// its being negligible): almost always right, but a very ill-conditioned finite end looks the same, so a
    /// fiber with such a path does not certify its real count.
    /// </summary>
    public bool InfinityByDecay { get; init; }
}
