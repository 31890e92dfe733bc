using System.Numerics;
using FiberWorkers.Algebra.Evaluation;
using FiberWorkers.Solving.Homotopies;

namespace FiberWorkers.Solving.Monodromy;

/// <summary>
/// The moving slice of the trace test: a curve C given by n homogenized equations E^h(Z) = 0 in n + 2
/// homogeneous coordinates, cut by the hyperplane Z_s + σ·(c·Z) = 0, tracked in the chart c·Z = 1, where the
/// slice reads Z_s + σ = 0. In that chart the slices for different σ are parallel hyperplanes whose common base
/// lies on the chart's hyperplane at infinity c·Z = 0, in general position for a random c — the setting in which
/// the sum of the intersection points is affine in σ exactly for a complete intersection (Leykin, Rodriguez &amp;
/// Sottile 2018). σ(t) = t·σ₁ along the homotopy.
/// </summary>
internal sealed class PencilHomotopy : IHomotopyDefinition
{
    private readonly CompiledSystem _curve;
    private readonly Complex[] _parameters;
    private readonly ProjectiveChart _chart;
    private readonly int _slice;
    private readonly Complex _target;

    /// <param name="curve">E^h: n equations in n + 2 homogeneous unknowns (homogenizing coordinate first).</param>
    /// <param name="parameters">The fixed parameter values of E.</param>
    /// <param name="chart">The random chart c.</param>
    /// <param name="slice">Index s of the homogeneous coordinate the slice fixes.</param>
    /// <param name="target">σ₁.</param>
    public PencilHomotopy(CompiledSystem curve, Complex[] parameters, ProjectiveChart chart, int slice, Complex target)
    {
        if (curve.UnknownCount != curve.EquationCount + 2 || chart.Length != curve.UnknownCount)
        {
            throw new ArgumentException("the curve needs n equations in n + 2 homogeneous unknowns", nameof(curve));
        }

        _curve = curve;
        _parameters = parameters;
        _chart = chart;
        _slice = slice;
        _target = target;
    }

    public int Dimension => _curve.UnknownCount;

    public IHomotopy CreateEvaluator() => new Evaluator(this);

    private sealed class Evaluator(PencilHomotopy definition) : IHomotopy
    {
        private readonly EvaluationWorkspace _workspace = definition._curve.CreateWorkspace();

        public int Dimension => definition.Dimension;

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values)
        {
            var n = definition._curve.EquationCount;
            definition._curve.Evaluate(x, definition._parameters, values[..n], _workspace);
            values[n] = x[definition._slice] + (t * definition._target);
            values[n + 1] = definition._chart.Residual(x);
        }

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values, Span<Complex> jacobian)
        {
            var n = definition._curve.EquationCount;
            var size = n + 2;
            definition._curve.Evaluate(x, definition._parameters, values[..n], jacobian[..(n * size)], _workspace);
            values[n] = x[definition._slice] + (t * definition._target);
            var sliceRow = jacobian.Slice(n * size, size);
            sliceRow.Clear();
            sliceRow[definition._slice] = Complex.One;
            values[n + 1] = definition._chart.Residual(x);
            definition._chart.Coefficients.CopyTo(jacobian.Slice((n + 1) * size, size));
        }

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values, Span<Complex> jacobian, Span<Complex> timeDerivative)
        {
            Evaluate(x, t, values, jacobian);
            timeDerivative.Clear();
            timeDerivative[definition._curve.EquationCount] = definition._target;
        }
    }
}
