using System.Numerics;
using FiberWorkers.Algebra.Evaluation;

namespace FiberWorkers.Solving.Homotopies;

/// <summary>
/// The coefficient-parameter homotopy H(x, t) = F(x; p(t)), p(t) = (1 − t)·p₀ + t·p₁ (Morgan &amp; Sommese 1989).
/// In the projective form the homogenized system is tracked in a random affine chart (n + 1 unknowns); in the
/// affine form F itself is tracked (n unknowns), which suits real segments whose solutions stay finite.
/// </summary>
internal sealed class ParameterHomotopy : IHomotopyDefinition
{
    private readonly CompiledSystem _system;
    private readonly ProjectiveChart? _chart;
    private readonly Complex[] _start;
    private readonly Complex[] _direction;

    /// <param name="system">F (affine) or F^h (projective, homogenizing unknown first).</param>
    /// <param name="chart">The chart for a projective homotopy, or null for an affine one.</param>
    /// <param name="start">p₀.</param>
    /// <param name="target">p₁.</param>
    public ParameterHomotopy(CompiledSystem system, ProjectiveChart? chart, ReadOnlySpan<Complex> start, ReadOnlySpan<Complex> target)
    {
        ArgumentNullException.ThrowIfNull(system);
        if (start.Length != system.ParameterCount || target.Length != system.ParameterCount)
        {
            throw new ArgumentException($"parameter points need {system.ParameterCount} entries");
        }

        var expectedUnknowns = system.EquationCount + (chart is null ? 0 : 1);
        if (system.UnknownCount != expectedUnknowns || (chart is not null && chart.Length != system.UnknownCount))
        {
            throw new ArgumentException("the system, chart and homotopy form do not fit together", nameof(system));
        }

        _system = system;
        _chart = chart;
        _start = start.ToArray();
        _direction = new Complex[start.Length];
        for (var k = 0; k < start.Length; k++)
        {
            _direction[k] = target[k] - start[k];
        }
    }

    public int Dimension => _system.UnknownCount;

    public IHomotopy CreateEvaluator() => new Evaluator(this);

    private sealed class Evaluator(ParameterHomotopy definition) : IHomotopy
    {
        private readonly EvaluationWorkspace _workspace = definition._system.CreateWorkspace();
        private readonly Complex[] _p = new Complex[definition._start.Length];

        public int Dimension => definition.Dimension;

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values)
        {
            var n = definition._system.EquationCount;
            SetParameters(t);
            definition._system.Evaluate(x, _p, values[..n], _workspace);
            if (definition._chart is { } chart)
            {
                values[n] = chart.Residual(x);
            }
        }

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values, Span<Complex> jacobian)
        {
            var n = definition._system.EquationCount;
            var unknowns = definition._system.UnknownCount;
            SetParameters(t);
            definition._system.Evaluate(x, _p, values[..n], jacobian[..(n * unknowns)], _workspace);
            AddChartRow(x, values, jacobian);
        }

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values, Span<Complex> jacobian, Span<Complex> timeDerivative)
        {
            var n = definition._system.EquationCount;
            var unknowns = definition._system.UnknownCount;
            SetParameters(t);
            definition._system.EvaluateAlong(
                x, _p, definition._direction, values[..n], jacobian[..(n * unknowns)], timeDerivative[..n], _workspace);
            if (definition._chart is not null)
            {
                timeDerivative[n] = Complex.Zero;
            }

            AddChartRow(x, values, jacobian);
        }

        private void SetParameters(Complex t)
        {
            for (var k = 0; k < _p.Length; k++)
            {
                _p[k] = definition._start[k] + (t * definition._direction[k]);
            }
        }

        private void AddChartRow(ReadOnlySpan<Complex> x, Span<Complex> values, Span<Complex> jacobian)
        {
            if (definition._chart is not { } chart)
            {
                return;
            }

            // The n×(n+1) Jacobian of F^h is exactly the first n rows of the (n+1)×(n+1) tracked Jacobian.
            var n = definition._system.EquationCount;
            values[n] = chart.Residual(x);
            chart.Coefficients.CopyTo(jacobian.Slice(n * (n + 1), n + 1));
        }
    }
}
