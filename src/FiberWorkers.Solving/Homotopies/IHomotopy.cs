using System.Numerics;

namespace FiberWorkers.Solving.Homotopies;

/// <summary>
/// A square homotopy H(x, t) = 0 in <see cref="Dimension"/> unknowns, t complex. Instances own scratch space
/// and are not thread-safe: create one per thread (see <see cref="IHomotopyDefinition"/>).
/// </summary>
internal interface IHomotopy
{
    /// <summary>N, the number of unknowns and equations of the tracked system.</summary>
    int Dimension { get; }

    /// <summary>H(x, t) only (the simplified-Newton corrector reuses a factored Jacobian).</summary>
    void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values);

    /// <summary>H(x, t) and ∂H/∂x (row-major N×N).</summary>
    void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values, Span<Complex> jacobian);

    /// <summary>H(x, t), ∂H/∂x and ∂H/∂t.</summary>
    void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values, Span<Complex> jacobian, Span<Complex> timeDerivative);
}

/// <summary>An immutable homotopy that hands out per-thread evaluators.</summary>
internal interface IHomotopyDefinition
{
    /// <summary>N, the number of unknowns and equations of the tracked system.</summary>
    int Dimension { get; }

    /// <summary>A fresh evaluator with its own scratch space.</summary>
    IHomotopy CreateEvaluator();
}
