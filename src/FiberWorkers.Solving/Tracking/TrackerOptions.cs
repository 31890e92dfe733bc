namespace FiberWorkers.Solving.Tracking;

/// <summary>The predictor of the path tracker.</summary>
public enum Predictor
{
    /// <summary>Classical fourth-order Runge–Kutta: four Jacobian factorizations per step, no history needed.</summary>
    RungeKutta4,

    /// <summary>
    /// Cubic Hermite extrapolation through the last two accepted points and their tangents: no extra evaluations,
    /// so a step costs two factorizations (the corrector's and the new tangent's). The first step of a segment uses
    /// Runge–Kutta.
    /// </summary>
    Hermite,
}

/// <summary>Settings of the predictor–corrector path tracker. Step sizes are fractions of one tracked segment.</summary>
public sealed record TrackerOptions
{
    /// <summary>The predictor. Default <see cref="Predictor.RungeKutta4"/> (fewer steps per path than Hermite here).</summary>
    public Predictor Predictor { get; init; } = Predictor.RungeKutta4;

    /// <summary>The defaults.</summary>
    public static TrackerOptions Default { get; } = new();

    /// <summary>
    /// Tighter settings for re-tracking paths suspected of jumping: smaller steps, stricter contraction and
    /// predictor tolerances.
    /// </summary>
    public static TrackerOptions Tight { get; } = new()
    {
        MaxStepSize = 0.02,
        MaxContraction = 0.05,
        PredictorTolerance = 1e-8,
        CorrectorTolerance = 1e-10,
        MaxCorrectorIterations = 8,
        MaxSteps = 200_000,
    };

    /// <summary>First step, as a fraction of the segment. Default 0.1.</summary>
    public double InitialStepSize { get; init; } = 0.1;

    /// <summary>
    /// When positive, the first step is θ·(1 + ‖x‖∞)/‖dx/dτ‖∞ for this θ (the path moves by about θ of its size),
    /// at most <see cref="InitialStepSize"/> and at least 1e-3. Default 0: always <see cref="InitialStepSize"/>.
    /// </summary>
    public double InitialStepFromTangent { get; init; }

    /// <summary>Largest step, as a fraction of the segment. Default 0.25.</summary>
    public double MaxStepSize { get; init; } = 0.25;

    /// <summary>Smallest step before the path fails with step-size underflow. Default 1e-13.</summary>
    public double MinStepSize { get; init; } = 1e-13;

    /// <summary>Most predictor–corrector steps (accepted plus rejected) on one segment. Default 50,000.</summary>
    public int MaxSteps { get; init; } = 50_000;

    /// <summary>Simplified-Newton iterations allowed per step. Default 5.</summary>
    public int MaxCorrectorIterations { get; init; } = 5;

    /// <summary>
    /// Corrector stops when ‖Δx‖∞ ≤ this · (1 + ‖x‖∞). Default 1e-8 (relative): enough for the predictor's
    /// derivatives; endpoints are refined to full precision separately.
    /// </summary>
    public double CorrectorTolerance { get; init; } = 1e-8;

    /// <summary>
    /// Largest Newton contraction ‖Δx_{k+1}‖ / ‖Δx_k‖ accepted in a step; a slower corrector means the
    /// predicted point is not deep inside its path's basin, where path jumping starts. Default 0.25.
    /// </summary>
    public double MaxContraction { get; init; } = 0.25;

    /// <summary>
    /// Target size of the predictor error (the first Newton correction, relative to 1 + ‖x‖∞) that drives
    /// step growth: the fourth-order predictor's error scales like h⁵. Default 1e-4, well inside the corrector's
    /// quadratic basin; the contraction and correction-ratio bounds catch steps that leave it.
    /// </summary>
    public double PredictorTolerance { get; init; } = 1e-4;

    /// <summary>
    /// Largest first correction as a fraction of the predicted move; larger means the predictor left the
    /// path. Default 0.25.
    /// </summary>
    public double MaxCorrectionRatio { get; init; } = 0.25;

    /// <summary>
    /// Newton steps at most that refine the end of a segment track (<c>FiberSolver.TrackSegment</c>), stopping
    /// early at a rounding-sized step. Default 3. One is enough where every end is certified afterwards: the
    /// corrector leaves the end within its tolerance of the path, one Newton step from there lands at rounding level
    /// (quadratic convergence), and the certificate's β measures what is left instead of a second step.
    /// </summary>
    public int EndNewtonSteps { get; init; } = 3;

    /// <summary>
    /// Whether a segment track estimates κ₁ at its end to judge the end regular (default true). False where the
    /// caller certifies every end at once and applies <c>FiberSolver.EndConditionLimit</c> to the certificate's exact
    /// condition instead: the estimate would be a second computation of the same figure.
    /// </summary>
    public bool EstimateEndCondition { get; init; } = true;
}
