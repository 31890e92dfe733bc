using FiberWorkers.Algebra.Polynomials;

namespace FiberWorkers.Solving.Tests.References;

/// <summary>Seeded random polynomials for the tests: dense supports, Gaussian coefficients.</summary>
internal static class RandomSystems
{
    /// <summary>A standard normal deviate (Box–Muller) from a seeded <see cref="Random"/>.</summary>
    public static double Gaussian(Random random)
    {
        var u = 1.0 - random.NextDouble();
        var v = random.NextDouble();
        return Math.Sqrt(-2 * Math.Log(u)) * Math.Cos(2 * Math.PI * v);
    }

    /// <summary>Every exponent vector in <paramref name="variables"/> variables of total degree at most <paramref name="degree"/>.</summary>
    public static IEnumerable<int[]> Monomials(int variables, int degree)
    {
        if (variables == 0)
        {
            yield return [];
            yield break;
        }

        for (var first = 0; first <= degree; first++)
        {
            foreach (var rest in Monomials(variables - 1, degree - first))
            {
                yield return [first, .. rest];
            }
        }
    }

    /// <summary>
    /// A polynomial with every monomial of degree ≤ <paramref name="degree"/>, coefficient of x^a drawn as
    /// √(weight(a))·N(0, 1).
    /// </summary>
    public static Polynomial Dense(int variables, int degree, Random random, Func<int[], double>? variance = null) =>
        Polynomial.FromTerms(
            variables,
            Monomials(variables, degree).Select(a => (a, Math.Sqrt(variance?.Invoke(a) ?? 1.0) * Gaussian(random))).ToArray());

    /// <summary>d!/(a₁!···aₙ!(d − |a|)!), the Kostlan (Bombieri–Weyl) variance of the coefficient of x^a.</summary>
    public static double Multinomial(int degree, int[] exponents)
    {
        var value = Factorial(degree) / Factorial(degree - exponents.Sum());
        foreach (var e in exponents)
        {
            value /= Factorial(e);
        }

        return value;
    }

    private static double Factorial(int k)
    {
        var value = 1.0;
        for (var i = 2; i <= k; i++)
        {
            value *= i;
        }

        return value;
    }
}
