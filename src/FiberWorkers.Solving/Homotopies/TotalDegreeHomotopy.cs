using System.Numerics;
using FiberWorkers.Algebra.Evaluation;

namespace FiberWorkers.Solving.Homotopies;

/// <summary>
/// The total-degree homotopy with the γ trick (Morgan &amp; Sommese 1987), homogenized and tracked in a random
/// affine chart: H(X, t) = (1 − t)·γ·G(X) + t·F^h(X; p), with start system G_i(X) = X_i^dᵢ − X₀^dᵢ (the
/// homogenized x_i^dᵢ − 1) whose Π dᵢ solutions are known in closed form.
/// </summary>
internal sealed class TotalDegreeHomotopy : IHomotopyDefinition
{
    private readonly CompiledSystem _system;
    private readonly ProjectiveChart _chart;
    private readonly Complex[] _parameters;
    private readonly Complex _gamma;
    private readonly int[] _degrees;

    /// <param name="homogenized">F^h, homogenizing unknown first.</param>
    /// <param name="degrees">dᵢ, the degree of each equation.</param>
    /// <param name="parameters">The parameter point p (complex).</param>
    /// <param name="chart">The affine chart.</param>
    /// <param name="gamma">γ, a random complex number of modulus one.</param>
    public TotalDegreeHomotopy(
        CompiledSystem homogenized, IReadOnlyList<int> degrees, ReadOnlySpan<Complex> parameters, ProjectiveChart chart, Complex gamma)
    {
        ArgumentNullException.ThrowIfNull(homogenized);
        ArgumentNullException.ThrowIfNull(degrees);
        ArgumentNullException.ThrowIfNull(chart);
        if (homogenized.UnknownCount != homogenized.EquationCount + 1 || chart.Length != homogenized.UnknownCount
            || degrees.Count != homogenized.EquationCount || parameters.Length != homogenized.ParameterCount)
        {
            throw new ArgumentException("the system, degrees, chart and parameters do not fit together");
        }

        _system = homogenized;
        _chart = chart;
        _parameters = parameters.ToArray();
        _gamma = gamma;
        _degrees = [.. degrees];
    }

    public int Dimension => _system.UnknownCount;

    /// <summary>The number of start solutions, Π dᵢ.</summary>
    public long PathCount
    {
        get
        {
            long count = 1;
            foreach (var d in _degrees)
            {
                count = checked(count * d);
            }

            return count;
        }
    }

    /// <summary>Start solution number <paramref name="index"/> (mixed-radix over roots of unity), in the chart.</summary>
    public void StartSolution(long index, Span<Complex> homogeneous)
    {
        var n = _degrees.Length;
        Span<Complex> affine = n <= 64 ? stackalloc Complex[n] : new Complex[n];
        for (var i = 0; i < n; i++)
        {
            var d = _degrees[i];
            var k = (int)(index % d);
            index /= d;
            affine[i] = Complex.FromPolarCoordinates(1.0, 2 * Math.PI * k / d);
        }

        _chart.Lift(affine, homogeneous);
    }

    public IHomotopy CreateEvaluator() => new Evaluator(this);

    private sealed class Evaluator(TotalDegreeHomotopy definition) : IHomotopy
    {
        private readonly EvaluationWorkspace _workspace = definition._system.CreateWorkspace();
        private readonly Complex[] _targetValues = new Complex[definition._system.EquationCount];
        private readonly Complex[] _targetJacobian = new Complex[definition._system.EquationCount * definition._system.UnknownCount];

        public int Dimension => definition.Dimension;

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values)
        {
            var n = definition._system.EquationCount;
            definition._system.Evaluate(x, definition._parameters, _targetValues, _workspace);
            var startWeight = (1 - t) * definition._gamma;
            for (var i = 0; i < n; i++)
            {
                var d = definition._degrees[i];
                var start = (IntegerPower(x[i + 1], d) - IntegerPower(x[0], d));
                values[i] = (startWeight * start) + (t * _targetValues[i]);
            }

            values[n] = definition._chart.Residual(x);
        }

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values, Span<Complex> jacobian) =>
            Evaluate(x, t, values, jacobian, default);

        public void Evaluate(ReadOnlySpan<Complex> x, Complex t, Span<Complex> values, Span<Complex> jacobian, Span<Complex> timeDerivative)
        {
            var n = definition._system.EquationCount;
            var size = n + 1;
            definition._system.Evaluate(x, definition._parameters, _targetValues, _targetJacobian, _workspace);
            var startWeight = (1 - t) * definition._gamma;
            var withTime = !timeDerivative.IsEmpty;
            for (var i = 0; i < n; i++)
            {
                var d = definition._degrees[i];
                var xi = x[i + 1];
                var x0 = x[0];
                var xiPower = IntegerPower(xi, d - 1);
                var x0Power = IntegerPower(x0, d - 1);
                var start = (xiPower * xi) - (x0Power * x0);
                values[i] = (startWeight * start) + (t * _targetValues[i]);
                var row = jacobian.Slice(i * size, size);
                var targetRow = _targetJacobian.AsSpan(i * size, size);
                for (var j = 0; j < size; j++)
                {
                    row[j] = t * targetRow[j];
                }

                row[i + 1] += startWeight * d * xiPower;
                row[0] -= startWeight * d * x0Power;
                if (withTime)
                {
                    timeDerivative[i] = _targetValues[i] - (definition._gamma * start);
                }
            }

            values[n] = definition._chart.Residual(x);
            definition._chart.Coefficients.CopyTo(jacobian.Slice(n * size, size));
            if (withTime)
            {
                timeDerivative[n] = Complex.Zero;
            }
        }

        private static Complex IntegerPower(Complex z, int k)
        {
            var result = Complex.One;
            for (var i = 0; i < k; i++)
            {
                result *= z;
            }

            return result;
        }
    }
}
