using System.Numerics;
using FiberWorkers.Algebra.Evaluation;
using FiberWorkers.Algebra.LinearAlgebra;

namespace FiberWorkers.Solving.Certification;

/// <summary>
/// Certifies solutions of a square polynomial system f(x) = F(x; p) at one parameter point with Smale's alpha
/// theory (Smale 1986; Blum, Cucker, Shub &amp; Smale 1998, ch. 8) and the reality tests of Hauenstein &amp; Sottile
/// (ACM TOMS 2012):
/// <list type="bullet">
/// <item>γ(f, x) ≤ μ(f, x)·D^(3/2) / (2‖x‖₁), μ = max(1, ‖f‖·‖Df(x)⁻¹Δ(x)‖), Δ = diag(√dᵢ·‖x‖₁^(dᵢ−1)),
/// ‖x‖₁ = √(1 + ‖x‖²), ‖f‖ the Bombieri–Weyl norm, D the largest degree (Shub &amp; Smale 1993);</item>
/// <item>x is an approximate zero when α = β·γ &lt; (13 − 3√17)/4 ≈ 0.1577, and its zero lies within 2β;</item>
/// <item>for real coefficients, the zero is real when α &lt; 0.03 and ‖x − x̄‖ &lt; 1/(20γ) (x and x̄ then share
/// their zero), and non-real when ‖x − x̄‖ &gt; 4β (the balls around x and x̄ are disjoint).</item>
/// </list>
/// The operator norm ‖Df⁻¹Δ‖ is bounded by its Frobenius norm, which keeps γ an upper bound; β includes the
/// rounding error of f(x) propagated through |Df⁻¹|. One instance per
/// thread; it reuses its buffers.
/// </summary>
internal sealed class AlphaCertifier
{
    /// <summary>(13 − 3√17)/4, Smale's constant.</summary>
    public static readonly double ApproximateZeroBound = (13 - (3 * Math.Sqrt(17))) / 4;

    private const double Epsilon = 1.1102230246251565e-16;

    private readonly CompiledSystem _system;
    private readonly Complex[] _parameters;
    private readonly bool _realCoefficients;
    private readonly int _n;
    private readonly int[] _degrees;
    private readonly int _maxDegree;
    private readonly double _bombieriWeylNorm;
    private readonly (int[] Exponents, double Magnitude)[][] _absoluteTerms;
    private readonly EvaluationWorkspace _workspace;
    private readonly Complex[] _values;
    private readonly Complex[] _jacobian;
    private readonly Complex[] _column;
    private readonly int[] _pivots;
    private readonly double[] _error;
    private readonly double[] _propagated;
    private readonly double[] _magnitudes;

    /// <param name="layout">The system's coefficient layout (computed once per system).</param>
    /// <param name="compiled">The compiled affine system.</param>
    /// <param name="parameters">The parameter point.</param>
    public AlphaCertifier(CoefficientLayout layout, CompiledSystem compiled, ReadOnlySpan<Complex> parameters)
    {
        ArgumentNullException.ThrowIfNull(layout);
        ArgumentNullException.ThrowIfNull(compiled);
        _system = compiled;
        _parameters = parameters.ToArray();
        _n = layout.UnknownCount;
        _degrees = layout.Degrees;
        _maxDegree = _degrees.Length == 0 ? 1 : _degrees.Max();
        _realCoefficients = true;
        foreach (var value in _parameters)
        {
            _realCoefficients &= value.Imaginary == 0;
        }

        _absoluteTerms = new (int[], double)[_n][];
        var squaredNorm = 0.0;
        for (var i = 0; i < _n; i++)
        {
            var monomials = layout.Equations[i];
            var terms = new (int[], double)[monomials.Length];
            for (var g = 0; g < monomials.Length; g++)
            {
                var magnitude = monomials[g].CoefficientAt(_parameters).Magnitude;
                squaredNorm += magnitude * magnitude * monomials[g].BombieriWeylWeight;
                terms[g] = (monomials[g].Exponents, magnitude);
            }

            _absoluteTerms[i] = terms;
        }

        _bombieriWeylNorm = Math.Sqrt(squaredNorm);
        _workspace = compiled.CreateWorkspace();
        _values = new Complex[_n];
        _jacobian = new Complex[_n * _n];
        _column = new Complex[_n];
        _pivots = new int[_n];
        _error = new double[_n];
        _propagated = new double[_n];
        _magnitudes = new double[_n];
    }

    /// <summary>True when this certifier is for <paramref name="compiled"/> at exactly <paramref name="parameters"/>.</summary>
    public bool Serves(CompiledSystem compiled, ReadOnlySpan<Complex> parameters) =>
        ReferenceEquals(compiled, _system) && parameters.SequenceEqual(_parameters);

    /// <summary>True when every coefficient of f is real (so reality can be decided).</summary>
    public bool RealCoefficients => _realCoefficients;

    /// <summary>Certifies the point x; also returns ‖f(x)‖∞ and κ₁(Df(x)) (exact, from the inverse).</summary>
    public (Certificate Certificate, double Residual, double Condition) Certify(ReadOnlySpan<Complex> x)
    {
        _system.Evaluate(x, _parameters, _values, _jacobian, _workspace);
        var residual = MaxNorm(_values);
        var jacobianNorm = ComplexLu.OneNorm(_jacobian, _n);
        if (!ComplexLu.Factor(_jacobian, _n, _pivots))
        {
            return (new Certificate(false, double.PositiveInfinity, double.PositiveInfinity, double.PositiveInfinity, Undecided),
                residual, double.PositiveInfinity);
        }

        // Rounding allowance: |f_computed − f| ≤ (terms + degree + 2)·2ε·Σ|aα|·|x|^α per equation (a Higham-style
        // bound for sums of products in complex arithmetic), so β ≤ ‖Df⁻¹f‖ + ‖ |Df⁻¹|·error ‖.
        for (var j = 0; j < _n; j++)
        {
            _magnitudes[j] = x[j].Magnitude;
        }

        for (var i = 0; i < _n; i++)
        {
            _error[i] = AbsoluteValue(i) * (_absoluteTerms[i].Length + _degrees[i] + 2) * Epsilon * 2;
            _propagated[i] = 0;
        }

        _values.AsSpan().CopyTo(_column);
        ComplexLu.Solve(_jacobian, _n, _pivots, _column);
        var newtonStep = TwoNorm(_column);

        var xNormSquared = 0.0;
        foreach (var value in x)
        {
            xNormSquared += (value.Real * value.Real) + (value.Imaginary * value.Imaginary);
        }

        var projectiveNorm = Math.Sqrt(1 + xNormSquared);
        var scaledFrobenius = 0.0;
        var inverseOneNorm = 0.0;
        for (var j = 0; j < _n; j++)
        {
            Array.Clear(_column);
            _column[j] = Complex.One;
            ComplexLu.Solve(_jacobian, _n, _pivots, _column);
            var columnSquared = 0.0;
            var columnSum = 0.0;
            for (var i = 0; i < _n; i++)
            {
                // One square root per entry instead of two scaled hypotenuses: these entries of Df⁻¹ are far from
                // overflow, and one that did overflow would make α infinite, which certifies nothing.
                var value = _column[i];
                var squared = (value.Real * value.Real) + (value.Imaginary * value.Imaginary);
                var magnitude = Math.Sqrt(squared);
                columnSquared += squared;
                columnSum += magnitude;
                _propagated[i] += magnitude * _error[j];
            }

            inverseOneNorm = Math.Max(inverseOneNorm, columnSum);

            var weight = Math.Sqrt(_degrees[j]) * Math.Pow(projectiveNorm, _degrees[j] - 1);
            scaledFrobenius += columnSquared * weight * weight;
        }

        scaledFrobenius = Math.Sqrt(scaledFrobenius);
        var beta = newtonStep + TwoNorm(_propagated.AsSpan());
        var mu = Math.Max(1, _bombieriWeylNorm * scaledFrobenius);
        var gamma = mu * Math.Pow(_maxDegree, 1.5) / (2 * projectiveNorm);
        var alpha = beta * gamma;
        var condition = jacobianNorm * inverseOneNorm;
        if (!double.IsFinite(alpha))
        {
            return (new Certificate(false, double.PositiveInfinity, beta, gamma, Undecided), residual, condition);
        }

        var approximateZero = alpha < ApproximateZeroBound;
        var reality = Reality.NotApplicable;
        if (_realCoefficients)
        {
            var conjugateDistance = 0.0;
            foreach (var value in x)
            {
                conjugateDistance += 4 * value.Imaginary * value.Imaginary;
            }

            conjugateDistance = Math.Sqrt(conjugateDistance);
            reality = !approximateZero ? Reality.Undecided
                : alpha < 0.03 && conjugateDistance < 1 / (20 * gamma) ? Reality.Real
                : conjugateDistance > 4 * beta ? Reality.NonReal
                : Reality.Undecided;
        }

        return (new Certificate(approximateZero, alpha, beta, gamma, reality), residual, condition);
    }

    /// <summary>
    /// True when two approximate zeros certainly have different associated zeros: their distance exceeds
    /// 2β₁ + 2β₂ (each zero lies within 2β of its point).
    /// </summary>
    public static bool CertainlyDistinct(ReadOnlySpan<Complex> x1, Certificate c1, ReadOnlySpan<Complex> x2, Certificate c2)
    {
        var squared = 0.0;
        for (var i = 0; i < x1.Length; i++)
        {
            var d = x1[i] - x2[i];
            squared += (d.Real * d.Real) + (d.Imaginary * d.Imaginary);
        }

        return c1.ApproximateZero && c2.ApproximateZero && Math.Sqrt(squared) > 2 * (c1.Beta + c2.Beta);
    }

    private const Reality Undecided = Reality.Undecided;

    /// <summary>Σ|aα|·|x|^α for one equation, from the magnitudes of x's coordinates (computed once a point).</summary>
    private double AbsoluteValue(int equation)
    {
        var sum = 0.0;
        foreach (var (exponents, magnitude) in _absoluteTerms[equation])
        {
            var term = magnitude;
            for (var j = 0; j < exponents.Length; j++)
            {
                for (var k = 0; k < exponents[j]; k++)
                {
                    term *= _magnitudes[j];
                }
            }

            sum += term;
        }

        return sum;
    }

    private static double MaxNorm(ReadOnlySpan<Complex> v)
    {
        var norm = 0.0;
        foreach (var value in v)
        {
            norm = Math.Max(norm, value.Magnitude);
        }

        return norm;
    }

    private static double TwoNorm(ReadOnlySpan<double> v)
    {
        var sum = 0.0;
        foreach (var value in v)
        {
            sum += value * value;
        }

        return Math.Sqrt(sum);
    }

    private static double TwoNorm(ReadOnlySpan<Complex> v)
    {
        var sum = 0.0;
        foreach (var value in v)
        {
            sum += (value.Real * value.Real) + (value.Imaginary * value.Imaginary);
        }

        return Math.Sqrt(sum);
    }
}
