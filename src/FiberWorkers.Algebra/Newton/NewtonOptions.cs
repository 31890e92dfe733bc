namespace FiberWorkers.Algebra.Newton;

/// <summary>Settings for <see cref="NewtonSolver"/>.</summary>
public sealed record NewtonOptions
{
    /// <summary>The defaults.</summary>
    public static NewtonOptions Default { get; } = new();

    /// <summary>Most Newton iterations. Default 25.</summary>
    public int MaxIterations { get; init; } = 25;

    /// <summary>
    /// Stop when the Newton step's max-norm is at most this times (1 + ‖x‖∞). Default 1e-13 (relative).
    /// </summary>
    public double StepTolerance { get; init; } = 1e-13;

    /// <summary>Stop early, as failed, when a step grows the residual for this many iterations in a row. Default 4.</summary>
    public int MaxGrowingSteps { get; init; } = 4;

    /// <summary>Estimate κ₁(∂F/∂x) at the end (a few extra solves); NaN when off. Default true.</summary>
    public bool EstimateCondition { get; init; } = true;
}
