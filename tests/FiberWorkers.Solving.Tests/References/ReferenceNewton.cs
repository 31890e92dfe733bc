using System.Numerics;
using FiberWorkers.Algebra.Polynomials;
using ComplexMatrix = MathNet.Numerics.LinearAlgebra.Complex.DenseMatrix;
using ComplexVector = MathNet.Numerics.LinearAlgebra.Complex.DenseVector;

namespace FiberWorkers.Solving.Tests.References;

/// <summary>
/// Newton's method for F(x; p) = 0 built from the term lists (symbolic derivatives, term-by-term evaluation) and
/// MathNet's complex LU, sharing neither the solver's compiled evaluator nor its linear algebra.
/// </summary>
internal sealed class ReferenceNewton
{
    private readonly PolynomialSystem _system;
    private readonly Complex[] _parameters;
    private readonly Polynomial[,] _jacobian;

    public ReferenceNewton(PolynomialSystem system, ReadOnlySpan<Complex> parameters)
    {
        _system = system;
        _parameters = parameters.ToArray();
        var n = system.UnknownCount;
        _jacobian = new Polynomial[n, n];
        for (var i = 0; i < n; i++)
        {
            for (var j = 0; j < n; j++)
            {
                _jacobian[i, j] = system.Equations[i].Derivative(j);
            }
        }
    }

    /// <summary>N(x) = x − DF(x)⁻¹F(x).</summary>
    public Complex[] Step(ReadOnlySpan<Complex> x)
    {
        var n = _system.UnknownCount;
        Complex[] values = [.. x, .. _parameters];
        var f = ComplexVector.Create(n, i => _system.Equations[i].Evaluate(values));
        var jacobian = ComplexMatrix.Create(n, n, (i, j) => _jacobian[i, j].Evaluate(values));
        var step = jacobian.LU().Solve(f);
        var next = new Complex[n];
        for (var i = 0; i < n; i++)
        {
            next[i] = x[i] - step[i];
        }

        return next;
    }

    /// <summary>The Newton iterates N¹(x) .. N^count(x).</summary>
    public IReadOnlyList<Complex[]> Iterates(ReadOnlySpan<Complex> x, int count)
    {
        var iterates = new List<Complex[]>();
        var current = x.ToArray();
        for (var k = 0; k < count; k++)
        {
            current = Step(current);
            iterates.Add(current);
        }

        return iterates;
    }

    /// <summary>‖a − b‖₂.</summary>
    public static double Distance(ReadOnlySpan<Complex> a, ReadOnlySpan<Complex> b)
    {
        var sum = 0.0;
        for (var i = 0; i < a.Length; i++)
        {
            var d = a[i] - b[i];
            sum += (d.Real * d.Real) + (d.Imaginary * d.Imaginary);
        }

        return Math.Sqrt(sum);
    }
}
