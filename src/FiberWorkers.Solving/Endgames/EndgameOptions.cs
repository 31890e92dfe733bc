namespace FiberWorkers.Solving.Endgames;

/// <summary>Settings of the end of a path: the direct finish for regular endpoints and the Cauchy endgame.</summary>
public sealed record EndgameOptions
{
    /// <summary>The defaults.</summary>
    public static EndgameOptions Default { get; } = new();

    /// <summary>The endgame zone starts at s = 1 − t equal to this. Default 0.1.</summary>
    public double StartRadius { get; init; } = 0.1;

    /// <summary>Each endgame level shrinks s by this factor. Default 0.25.</summary>
    public double RadiusRatio { get; init; } = 0.25;

    /// <summary>Most endgame levels before giving up (s ≥ StartRadius · RadiusRatio^levels). Default 10.</summary>
    public int MaxLevels { get; init; } = 10;

    /// <summary>Sample points (chords tracked) per loop around t = 1. Default 8.</summary>
    public int SamplesPerLoop { get; init; } = 8;

    /// <summary>Most loops before a path is declared failed (the largest cycle number recognized). Default 16.</summary>
    public int MaxCycleNumber { get; init; } = 16;

    /// <summary>A loop has closed when it returns within this relative distance of its start. Default 1e-6.</summary>
    public double LoopClosingTolerance { get; init; } = 1e-6;

    /// <summary>Two successive endpoint estimates agree within this relative distance: converged. Default 1e-8.</summary>
    public double ConvergenceTolerance { get; init; } = 1e-8;

    /// <summary>
    /// At the start of the zone, paths with κ(∂H/∂x) below this try to run straight to t = 1. Default 1e6. For
    /// projective homotopies κ is taken in the orthogonal chart at the unit-normalized point (independent of the
    /// random chart).
    /// </summary>
    public double DirectConditionLimit { get; init; } = 1e6;

    /// <summary>Step budget of the straight finish before falling back to the endgame. Default 300.</summary>
    public int DirectStepBudget { get; init; } = 300;

    /// <summary>An endpoint whose κ(∂H/∂x) exceeds this is singular (κ as for <see cref="DirectConditionLimit"/>). Default 1e9.</summary>
    public double SingularConditionLimit { get; init; } = 1e9;

    /// <summary>A Newton-refined endpoint with |X₀| / ‖X‖∞ below this lies at infinity. Default 1e-8.</summary>
    public double InfinityThreshold { get; init; } = 1e-8;

    /// <summary>
    /// The same threshold for singular endpoints, which only the endgame's estimate locates (to about 1e-6
    /// relative, the loop-closing tolerance). Default 1e-5.
    /// </summary>
    public double SingularInfinityThreshold { get; init; } = 1e-5;
}
