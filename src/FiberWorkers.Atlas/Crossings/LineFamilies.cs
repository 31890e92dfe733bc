using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Atlas.Crossings;

/// <summary>
/// The derived families whose solutions on a line p(s) = a + s·d are the line's crossings. Both are posed on the
/// homogenized family in a random complex affine chart ℓ·X = 1, G(X; p) = [F^h(X; p); ℓ·X − 1], so that solutions
/// at infinity (X₀ = 0) are finite points of the chart:
/// <list type="bullet">
/// <item>folds: { G(X; a + s·d) = 0, G_X(X; a + s·d)·v = 0, c·v = 1 } in (X, v, s) (Moore &amp; Spence 1980;
/// Griewank &amp; Reddien 1984) — two solutions meet, at a finite point (X₀ ≠ 0) or at infinity (X₀ = 0);</item>
/// <item>passages: { G(X; a + s·d) = 0, X₀ = 0 } in (X, s) — one solution passes through infinity.</item>
/// </list>
/// Parameters are (a₁..a_m, d₁..d_m, ℓ₀..ℓₙ) and, for folds, also (c₀..cₙ). The charts ℓ and c are random complex
/// values (seeded, fixed per family) passed as parameters because polynomials here have real coefficients; complex
/// charts keep real solutions away from the charts' hyperplanes at infinity, which real charts would not (a real
/// point can lie on a real hyperplane, and then its chart coordinates blow up).
/// </summary>
internal sealed class LineFamilies
{
    public LineFamilies(PolynomialSystem family, ulong seed)
    {
        ArgumentNullException.ThrowIfNull(family);
        var n = family.UnknownCount;
        var m = family.ParameterCount;
        if (m == 0)
        {
            throw new ArgumentException("a family without parameters has no lines", nameof(family));
        }

        var random = new SeededRandom(SeededRandom.Derive(seed, "line-families"));
        var xCount = n + 1;
        Chart = [.. Enumerable.Range(0, xCount).Select(_ => random.NextUnitComplex())];
        Normal = [.. Enumerable.Range(0, xCount).Select(_ => random.NextUnitComplex())];
        ParameterCount = m;
        var homogenized = family.Homogenize();
        var chartNames = homogenized.Unknowns.Select(u => $"l_{u}").ToArray();
        var normalNames = homogenized.Unknowns.Select(u => $"c_{u}").ToArray();
        string[] lineNames = [.. family.Parameters.Select(p => $"a_{p}"), .. family.Parameters.Select(p => $"d_{p}")];

        // Folds: variables X (n+1), v (n+1), s, a (m), d (m), ℓ (n+1), c (n+1).
        var foldCount = xCount + xCount + 1 + m + m + xCount + xCount;
        var sIndex = 2 * xCount;
        var aIndex = sIndex + 1;
        var dIndex = aIndex + m;
        var lIndex = dIndex + m;
        var cIndex = lIndex + xCount;
        var images = new Polynomial[xCount + m];
        for (var j = 0; j < xCount; j++)
        {
            images[j] = Polynomial.Variable(foldCount, j);
        }

        var s = Polynomial.Variable(foldCount, sIndex);
        for (var k = 0; k < m; k++)
        {
            images[xCount + k] = Polynomial.Variable(foldCount, aIndex + k).Add(s.Multiply(Polynomial.Variable(foldCount, dIndex + k)));
        }

        var g = new List<Polynomial>();
        var gx = new List<Polynomial[]>();
        foreach (var equation in homogenized.Equations)
        {
            g.Add(equation.Substitute(images));
            gx.Add([.. Enumerable.Range(0, xCount).Select(j => equation.Derivative(j).Substitute(images))]);
        }

        g.Add(Bilinear(foldCount, 0, lIndex, xCount, -1));
        gx.Add([.. Enumerable.Range(0, xCount).Select(j => Polynomial.Variable(foldCount, lIndex + j))]);

        var folds = new List<Polynomial>(g);
        foreach (var row in gx)
        {
            var sum = Polynomial.Zero(foldCount);
            for (var j = 0; j < xCount; j++)
            {
                sum = sum.Add(row[j].Multiply(Polynomial.Variable(foldCount, xCount + j)));
            }

            folds.Add(sum);
        }

        folds.Add(Bilinear(foldCount, xCount, cIndex, xCount, -1));
        var xNames = homogenized.Unknowns.ToArray();
        Folds = new PolynomialSystem([.. xNames, .. xNames.Select(u => $"v_{u}"), "s"], [.. lineNames, .. chartNames, .. normalNames], folds);

        // Passages: variables X (n+1), s, a, d, ℓ — drop v and c by projection.
        var passageCount = xCount + 1 + m + m + xCount;
        var map = new int[foldCount];
        for (var v = 0; v < foldCount; v++)
        {
            map[v] = v < xCount ? v : v == sIndex ? xCount : v >= aIndex && v < cIndex ? v - xCount : -1;
        }

        var passages = g.Select(p => Project(p, passageCount, map)).ToList();
        passages.Add(Polynomial.Variable(passageCount, 0));
        Passages = new PolynomialSystem([.. xNames, "s"], [.. lineNames, .. chartNames], passages);
    }

    /// <summary>m, the family's parameter count (a line has 2m line parameters).</summary>
    public int ParameterCount { get; }

    /// <summary>The fold system's parameter values for the line (a, d): a, d, then the fixed charts ℓ and c.</summary>
    public System.Numerics.Complex[] FoldParameters(ReadOnlySpan<System.Numerics.Complex> a, ReadOnlySpan<System.Numerics.Complex> d) =>
        [.. a, .. d, .. Chart, .. Normal];

    /// <summary>The passage system's parameter values for the line (a, d): a, d, then the chart ℓ.</summary>
    public System.Numerics.Complex[] PassageParameters(ReadOnlySpan<System.Numerics.Complex> a, ReadOnlySpan<System.Numerics.Complex> d) =>
        [.. a, .. d, .. Chart];

    /// <summary>ℓ, the complex chart of the homogenized family.</summary>
    public System.Numerics.Complex[] Chart { get; }

    /// <summary>c, the complex normalization of v.</summary>
    public System.Numerics.Complex[] Normal { get; }

    /// <summary>The fold system in (X, v, s).</summary>
    public PolynomialSystem Folds { get; }

    /// <summary>The passage system in (X, s).</summary>
    public PolynomialSystem Passages { get; }

    /// <summary>Σ_j y_{start+j}·w_{weights+j} + constant: a linear form with coefficients that are variables.</summary>
    private static Polynomial Bilinear(int variableCount, int start, int weights, int count, double constant)
    {
        var result = Polynomial.Constant(variableCount, constant);
        for (var j = 0; j < count; j++)
        {
            result = result.Add(Polynomial.Variable(variableCount, start + j).Multiply(Polynomial.Variable(variableCount, weights + j)));
        }

        return result;
    }

    private static Polynomial Project(Polynomial polynomial, int newCount, int[] map)
    {
        var terms = new List<(int[], double)>();
        for (var t = 0; t < polynomial.TermCount; t++)
        {
            var exponents = polynomial.ExponentsOf(t);
            var projected = new int[newCount];
            for (var v = 0; v < exponents.Length; v++)
            {
                if (exponents[v] == 0)
                {
                    continue;
                }

                if (map[v] < 0)
                {
                    throw new InvalidOperationException("the polynomial uses a variable that the projection drops");
                }

                projected[map[v]] += exponents[v];
            }

            terms.Add((projected, polynomial.CoefficientOf(t)));
        }

        return Polynomial.FromTerms(newCount, terms);
    }
}
