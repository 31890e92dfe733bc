namespace FiberWorkers.Algebra.Newton;

/// <summary>What a Newton run did.</summary>
/// <param name="Converged">True when the step tolerance was met.</param>
/// <param name="Iterations">Newton steps taken.</param>
/// <param name="ResidualNorm">‖F(x)‖∞ at the returned x.</param>
/// <param name="LastStepNorm">‖Δx‖∞ of the last step.</param>
/// <param name="ConditionEstimate">Estimate of κ₁(∂F/∂x) at the returned x (∞ when singular).</param>
public readonly record struct NewtonResult(
    bool Converged, int Iterations, double ResidualNorm, double LastStepNorm, double ConditionEstimate);
