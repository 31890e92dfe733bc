using System.Numerics;

namespace FiberWorkers.Solving.Tests.References;

/// <summary>
/// The number of distinct real roots of an integer polynomial by Sturm's theorem (Sturm 1829), in exact integer
/// arithmetic: the chain p, p′, −rem(p, p′), ... is built from pseudo-remainders scaled by |lc|^(δ+1) (a positive
/// factor, so every sign of the true remainder is kept) and divided by their positive content. No rounding enters,
/// so the count is exact. Written for the tests; it shares no code with the solver.
/// </summary>
internal static class SturmSequence
{
    /// <summary>Distinct real roots of Σ coefficients[k]·x^k over all of ℝ (leading coefficient nonzero).</summary>
    public static int DistinctRealRoots(IReadOnlyList<long> coefficients) => Analyse(coefficients).RealRoots;

    /// <summary>True when p and p′ have no common factor (p has no repeated root, complex ones included).</summary>
    public static bool IsSquareFree(IReadOnlyList<long> coefficients) => Analyse(coefficients).LastDegree == 0;

    private static (int RealRoots, int LastDegree) Analyse(IReadOnlyList<long> coefficients)
    {
        var p = Trim([.. coefficients.Select(c => new BigInteger(c))]);
        if (p.Length < 2)
        {
            throw new ArgumentException("the polynomial must have degree at least 1", nameof(coefficients));
        }

        var chain = new List<BigInteger[]> { p, Derivative(p) };
        while (true)
        {
            var remainder = SignedRemainder(chain[^2], chain[^1]);
            if (remainder.Length == 0)
            {
                break;
            }

            chain.Add(Negate(remainder));
        }

        // Sign at +∞ is the sign of the leading coefficient; at −∞ it flips for odd degree.
        var atPlus = chain.Select(q => q[^1].Sign).ToArray();
        var atMinus = chain.Select(q => (q.Length - 1) % 2 == 0 ? q[^1].Sign : -q[^1].Sign).ToArray();
        return (SignChanges(atMinus) - SignChanges(atPlus), chain[^1].Length - 1);
    }

    /// <summary>A positive multiple of rem(a, b), divided by its content; empty when b divides a.</summary>
    private static BigInteger[] SignedRemainder(BigInteger[] a, BigInteger[] b)
    {
        var r = (BigInteger[])a.Clone();
        var lead = b[^1];
        var shifts = r.Length - b.Length + 1;
        // The pseudo-remainder lc(b)^shifts·a mod b = lc(b)^shifts·rem(a, b), shifts = deg a − deg b + 1; each
        // elimination step multiplies by lc(b) once.
        var degree = r.Length - 1;
        var steps = 0;
        while (degree >= b.Length - 1 && r.Length > 0)
        {
            var factor = r[degree];
            for (var k = 0; k <= degree; k++)
            {
                r[k] *= lead;
            }

            for (var k = 0; k < b.Length; k++)
            {
                r[degree - b.Length + 1 + k] -= factor * b[k];
            }

            steps++;
            r = Trim(r);
            degree = r.Length - 1;
        }

        // Steps skipped because a coefficient vanished early still owe their factor lc(b).
        for (; steps < shifts; steps++)
        {
            for (var k = 0; k < r.Length; k++)
            {
                r[k] *= lead;
            }
        }

        // Make the factor |lc(b)|^shifts, positive, so that the signs of rem(a, b) are kept.
        if (lead.Sign < 0 && shifts % 2 == 1)
        {
            r = Negate(r);
        }

        return DivideByContent(r);
    }

    private static BigInteger[] Derivative(BigInteger[] p)
    {
        var d = new BigInteger[p.Length - 1];
        for (var k = 1; k < p.Length; k++)
        {
            d[k - 1] = p[k] * k;
        }

        return DivideByContent(Trim(d));
    }

    private static BigInteger[] DivideByContent(BigInteger[] p)
    {
        if (p.Length == 0)
        {
            return p;
        }

        var content = BigInteger.Zero;
        foreach (var c in p)
        {
            content = BigInteger.GreatestCommonDivisor(content, c);
        }

        return content <= 1 ? p : [.. p.Select(c => c / content)];
    }

    private static BigInteger[] Negate(BigInteger[] p) => [.. p.Select(c => -c)];

    private static BigInteger[] Trim(BigInteger[] p)
    {
        var length = p.Length;
        while (length > 0 && p[length - 1].IsZero)
        {
            length--;
        }

        return length == p.Length ? p : p[..length];
    }

    private static int SignChanges(int[] signs)
    {
        var changes = 0;
        var last = 0;
        foreach (var s in signs)
        {
            if (s == 0)
            {
                continue;
            }

            if (last != 0 && s != last)
            {
                changes++;
            }

            last = s;
        }

        return changes;
    }
}
