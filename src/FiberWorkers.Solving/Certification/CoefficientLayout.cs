using System.Numerics;
using FiberWorkers.Algebra.Polynomials;

namespace FiberWorkers.Solving.Certification;

/// <summary>
/// Each equation of F(x; p) regrouped as a polynomial in x whose coefficients are polynomials in p, with the
/// Bombieri–Weyl weight α!(d − |α|)!/d! of every monomial. Computed once per system, so that certifying at a
/// new parameter point only evaluates the coefficients.
/// </summary>
internal sealed class CoefficientLayout
{
    public CoefficientLayout(PolynomialSystem system)
    {
        ArgumentNullException.ThrowIfNull(system);
        var n = system.UnknownCount;
        UnknownCount = n;
        Degrees = [.. system.Degrees];
        Equations = new Monomial[system.Equations.Count][];
        for (var i = 0; i < system.Equations.Count; i++)
        {
            var equation = system.Equations[i];
            var groups = new Dictionary<MonomialKey, List<(double, int[])>>();
            var order = new List<MonomialKey>();
            for (var t = 0; t < equation.TermCount; t++)
            {
                var exponents = equation.ExponentsOf(t);
                var key = new MonomialKey(exponents[..n].ToArray());
                if (!groups.TryGetValue(key, out var list))
                {
                    list = [];
                    groups[key] = list;
                    order.Add(key);
                }

                list.Add((equation.CoefficientOf(t), exponents[n..].ToArray()));
            }

            Equations[i] = [.. order.Select(key => new Monomial(key.Exponents, [.. groups[key]], Weight(key.Exponents, Degrees[i])))];
        }
    }

    public int UnknownCount { get; }

    public int[] Degrees { get; }

    /// <summary>Per equation, its monomials in x.</summary>
    public Monomial[][] Equations { get; }

    private static double Weight(int[] exponents, int degree)
    {
        var weight = 1.0 / Factorial(degree);
        var total = 0;
        foreach (var e in exponents)
        {
            weight *= Factorial(e);
            total += e;
        }

        return weight * Factorial(degree - total);
    }

    private static double Factorial(int k)
    {
        var result = 1.0;
        for (var i = 2; i <= k; i++)
        {
            result *= i;
        }

        return result;
    }

    /// <summary>x^Exponents with coefficient Σ c·p^β over <see cref="Terms"/>.</summary>
    internal sealed record Monomial(int[] Exponents, (double Coefficient, int[] ParameterExponents)[] Terms, double BombieriWeylWeight)
    {
        public Complex CoefficientAt(ReadOnlySpan<Complex> parameters)
        {
            var sum = Complex.Zero;
            foreach (var (coefficient, powers) in Terms)
            {
                Complex term = coefficient;
                for (var k = 0; k < powers.Length; k++)
                {
                    for (var e = 0; e < powers[k]; e++)
                    {
                        term *= parameters[k];
                    }
                }

                sum += term;
            }

            return sum;
        }
    }
}
