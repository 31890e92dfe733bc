using System.Globalization;
using System.Numerics;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Fibers;

/// <summary>Total-degree solves of benchmark and random systems against published or theorem-given counts.</summary>
public sealed class TotalDegreeReferenceTests
{
    [Theory]
    [InlineData(4)]
    [InlineData(5)]
    [InlineData(6)]
    [InlineData(7)]
    public void Katsura_has_two_to_the_n_regular_solutions(int n)
    {
        // Reference: Katsura-n has 2ⁿ complex solutions, all finite and nonsingular, equal to its Bézout number
        // (Katsura 1990 benchmark family — REFERENCES.md).
        var family = TestFamilies.Katsura(n);
        Assert.Equal(new BigInteger(1 << n), family.System.BezoutNumber);

        var fiber = new FiberSolver(family.System).SolveTotalDegree([]);

        Assert.Equal(1 << n, fiber.PathsTracked);
        Assert.Equal(1 << n, fiber.StatusCounts[PathStatus.Regular]);
        Assert.Equal(0, fiber.StatusCounts[PathStatus.Failed]);
        Assert.Equal(1 << n, fiber.RootCount);
        Assert.All(fiber.Solutions, s => Assert.True(s.Certified && s.Residual < 1e-12, $"residual {s.Residual}"));
        Assert.True(fiber.RealCountCertified);
    }

    [Fact]
    public void Cyclic_5_has_70_regular_solutions_and_classifies_the_other_paths()
    {
        // Reference: the cyclic 5-roots problem has 70 isolated solutions (Björck & Fröberg, J. Symbolic Comput.
        // 12 (1991) — REFERENCES.md). Its Bézout number is 5! = 120; the other 50 paths must end singular or at
        // infinity, none failed.
        var family = TestFamilies.Cyclic(5);

        var fiber = new FiberSolver(family.System).SolveTotalDegree([]);

        Assert.Equal(120, fiber.PathsTracked);
        Assert.Equal(0, fiber.StatusCounts[PathStatus.Failed]);
        Assert.Equal(70, fiber.StatusCounts[PathStatus.Regular]);
        Assert.Equal(50, fiber.StatusCounts[PathStatus.Singular] + fiber.StatusCounts[PathStatus.AtInfinity]);
        Assert.Equal(70, fiber.RootCount);
        Assert.All(fiber.Solutions, s => Assert.True(s.Certified, $"path {s.PathIndex} not certified"));
        // Every solution is a cyclic 5-root: z₁z₂z₃z₄z₅ = 1 (checked directly, not through the compiled system).
        Assert.All(fiber.Solutions, s => Assert.True(Complex.Abs(s.Values.Aggregate(Complex.One, (a, b) => a * b) - 1) < 1e-10));
    }

    [Theory]
    [InlineData(11, new[] { 2, 2 })]
    [InlineData(12, new[] { 3, 2 })]
    [InlineData(13, new[] { 3, 3 })]
    [InlineData(14, new[] { 4, 3 })]
    [InlineData(15, new[] { 2, 2, 2 })]
    [InlineData(16, new[] { 3, 2, 2 })]
    [InlineData(17, new[] { 3, 3, 2 })]
    public void Random_dense_real_system_has_the_Bezout_number_of_regular_solutions(int seed, int[] degrees)
    {
        // Reference: a system with generic coefficients on the full dense supports of degrees d₁..dₙ has exactly
        // Π dᵢ isolated solutions, all regular and finite (Bézout's theorem — REFERENCES.md). Coefficients are
        // seeded standard normals, real.
        var random = new Random(seed);
        var n = degrees.Length;
        var equations = degrees.Select(d => RandomSystems.Dense(n, d, random)).ToArray();
        var system = new PolynomialSystem([.. Enumerable.Range(1, n).Select(i => $"x{i}")], [], equations);
        var bezout = degrees.Aggregate(1, (a, b) => a * b);

        var fiber = new FiberSolver(system).SolveTotalDegree([]);

        Assert.Equal(bezout, fiber.PathsTracked);
        Assert.Equal(0, fiber.StatusCounts[PathStatus.Failed]);
        Assert.Equal(bezout, fiber.StatusCounts[PathStatus.Regular]);
        Assert.Equal(bezout, fiber.RootCount);
        Assert.True(fiber.RealCountCertified);
        // Non-real solutions of a real system come in conjugate pairs, so the real count has the parity of Π dᵢ.
        Assert.Equal(bezout % 2, fiber.RealCount % 2);
    }

    [Theory]
    [InlineData(27_001)]
    [InlineData(27_002)]
    [InlineData(27_003)]
    public void Random_cubic_surface_contains_27_lines_of_which_3_7_15_or_27_are_real(int seed)
    {
        // Reference: a smooth cubic surface contains exactly 27 complex lines; a real one contains 3, 7, 15 or 27
        // real lines (Cayley & Salmon 1849; Schläfli 1858 — REFERENCES.md).
        // Chart: lines x = a₁ + a₂t, y = b₁ + b₂t, z = t (every line not parallel to z = 0; a generic surface has
        // none of those). Substituting into a random dense cubic f (seeded real coefficients) and asking the four
        // coefficients of t⁰..t³ to vanish gives 4 cubics in (a₁, a₂, b₁, b₂): Bézout number 81.
        var random = new Random(seed);
        var cubic = RandomSystems.Dense(3, 3, random);
        var system = LineSystem(cubic);
        Assert.Equal(new BigInteger(81), system.BezoutNumber);

        // 27 lines on a smooth cubic surface (Cayley & Salmon 1849) bound the isolated solutions: reaching it lets the
        // 54 paths that end at infinity (judged from their decay) not stand in the way of a certified count.
        var fiber = new FiberSolver(system).SolveTotalDegree([], rootCountBound: 27);

        var where = string.Create(CultureInfo.InvariantCulture, $"seed {seed}");
        Assert.True(fiber.StatusCounts[PathStatus.Failed] == 0, $"{where}: failed paths");
        Assert.True(fiber.RootCount == 27, $"{where}: {fiber.RootCount} lines");
        Assert.True(fiber.RealCountCertified, $"{where}: not certified");
        Assert.Contains(fiber.RealCount, new[] { 3, 7, 15, 27 });
        // Each real line lies on the surface: f vanishes along it (evaluated from the cubic itself, not from the
        // derived equations).
        foreach (var line in fiber.RealSolutions)
        {
            var (a1, a2, b1, b2) = (line.Values[0].Real, line.Values[1].Real, line.Values[2].Real, line.Values[3].Real);
            foreach (var t in new[] { -2.0, -0.5, 0.0, 0.7, 3.0 })
            {
                var value = cubic.Evaluate([a1 + (a2 * t), b1 + (b2 * t), t]).Magnitude;
                var scale = 1 + Math.Pow(Math.Abs(a1 + (a2 * t)) + Math.Abs(b1 + (b2 * t)) + Math.Abs(t), 3);
                Assert.True(value < 1e-10 * scale, $"{where}: f = {value:G3} at t = {t} on line ({SolutionSets.Format(line.Values)})");
            }
        }
    }

    [Theory]
    [InlineData(9_001)]
    [InlineData(9_002)]
    [InlineData(9_003)]
    [InlineData(9_004)]
    public void Cubic_surface_through_nine_chosen_real_lines_has_15_or_27_real_lines(int seed)
    {
        // Our own construction: with real affine linear forms l₁, l₂, l₃, m₁, m₂, m₃ (seeded) and ε ≠ 0, the surface
        // l₁l₂l₃ + ε·m₁m₂m₃ = 0 contains the nine real lines {lᵢ = 0 = mⱼ} (both terms vanish on them; checked
        // below by evaluating f). A smooth real cubic surface has 3, 7, 15 or 27 real lines (Schläfli 1858 —
        // REFERENCES.md), so this one must have 15 or 27, among them the nine.
        // These surfaces often have a line within a few degrees of horizontal, which the chart z = t renders with
        // coordinates in the hundreds and κ up to ~1e10: such a line may stay uncertified (and then so must the
        // count), but it must still be found. Seeds 9005, 9021 and 9024 lose such a line altogether; see
        // Certified_line_counts_on_random_cubic_surfaces_are_possible_counts.
        var cubic = NineLineSurface(seed, out var l, out var m);

        var fiber = new FiberSolver(LineSystem(cubic)).SolveTotalDegree([], rootCountBound: 27);

        var where = string.Create(CultureInfo.InvariantCulture, $"seed {seed}");
        Assert.True(fiber.RootCount == 27, $"{where}: {fiber.RootCount} lines");
        Assert.Contains(fiber.RealCount, new[] { 15, 27 });
        foreach (var uncertified in fiber.Solutions.Where(s => !s.Certified))
        {
            Assert.True(uncertified.Condition > 1e6, $"{where}: uncertified line with κ = {uncertified.Condition:G3}");
            Assert.False(fiber.RealCountCertified);
        }

        foreach (var li in l)
        {
            foreach (var mj in m)
            {
                var known = IntersectionLine(li, mj);
                foreach (var t in new[] { -1.0, 0.0, 2.0 })
                {
                    Assert.True(cubic.Evaluate([known[0] + (known[1] * t), known[2] + (known[3] * t), t]).Magnitude < 1e-9);
                }

                // Found: a real solution within 1e-8, or, for an ill-conditioned line, within what double precision
                // can resolve there (forward error up to κ times a few units of rounding: 2e-8 at κ ≈ 1e10, seed 9002).
                var nearest = fiber.RealSolutions.MinBy(line => SolutionSets.RelativeDistance(known, line.Values));
                Assert.NotNull(nearest);
                var tolerance = Math.Max(1e-8, 10 * nearest.Condition * Math.Pow(2, -52));
                Assert.True(
                    SolutionSets.RelativeDistance(known, nearest.Values) < tolerance,
                    $"{where}: line {{l = 0 = m}} not found (nearest at {SolutionSets.RelativeDistance(known, nearest.Values):E2}, κ = {nearest.Condition:E2})");
            }
        }
    }

    // Regression: on the dense surface of seed 27008 (and nine-line seeds 9005, 9017, 9021, 9024) an ill-conditioned
    // real line (κ ≈ 1e12 in this chart) was judged at infinity from the decay of X₀ alone and the lost line went
    // into a certified count of 26. Such verdicts now withhold certification (PathResult.InfinityByDecay).
    [Fact]
    public void Certified_line_counts_on_random_cubic_surfaces_are_possible_counts()
    {
        // Honesty, not precision: a nearly horizontal line may be beyond double precision in this chart, but a count
        // the solver calls certified must be one a smooth cubic surface can have (Cayley & Salmon 1849; Schläfli
        // 1858): 27 lines, of which 3, 7, 15 or 27 real; nine-line surfaces (above) have at least 9 real ones.
        var problems = new List<string>();
        for (var seed = 27_001; seed <= 27_030; seed++)
        {
            Check($"dense seed {seed}", RandomSystems.Dense(3, 3, new Random(seed)), [3, 7, 15, 27]);
        }

        for (var seed = 9_001; seed <= 9_030; seed++)
        {
            Check($"nine-line seed {seed}", NineLineSurface(seed, out _, out _), [15, 27]);
        }

        Assert.True(problems.Count == 0, string.Join("; ", problems));

        void Check(string where, Polynomial cubic, int[] possibleRealCounts)
        {
            var fiber = new FiberSolver(LineSystem(cubic)).SolveTotalDegree([], rootCountBound: 27);
            if (fiber.RealCountCertified && (fiber.RootCount != 27 || !possibleRealCounts.Contains(fiber.RealCount)))
            {
                problems.Add($"{where}: certified {fiber.RealCount} real of {fiber.RootCount} lines");
            }
        }
    }

    /// <summary>l₁l₂l₃ + ε·m₁m₂m₃ with seeded Gaussian affine planes and ε uniform in [0.5, 1.5].</summary>
    private static Polynomial NineLineSurface(int seed, out Polynomial[] l, out Polynomial[] m)
    {
        var random = new Random(seed);
        Polynomial Plane() => Polynomial.FromTerms(
            3, [([0, 0, 0], RandomSystems.Gaussian(random)), ([1, 0, 0], RandomSystems.Gaussian(random)),
                ([0, 1, 0], RandomSystems.Gaussian(random)), ([0, 0, 1], RandomSystems.Gaussian(random))]);
        l = [Plane(), Plane(), Plane()];
        m = [Plane(), Plane(), Plane()];
        var epsilon = 0.5 + random.NextDouble();
        return l[0].Multiply(l[1]).Multiply(l[2]).Add(m[0].Multiply(m[1]).Multiply(m[2]).Scale(epsilon));
    }

    /// <summary>The line {l = 0 = m} as (a₁, a₂, b₁, b₂) with x = a₁ + a₂t, y = b₁ + b₂t, z = t (Cramer's rule).</summary>
    private static Complex[] IntersectionLine(Polynomial l, Polynomial m)
    {
        double Coefficient(Polynomial p, int[] exponents)
        {
            for (var term = 0; term < p.TermCount; term++)
            {
                if (p.ExponentsOf(term).SequenceEqual(exponents))
                {
                    return p.CoefficientOf(term);
                }
            }

            return 0;
        }

        // l = l₀ + l₁x + l₂y + l₃z: solve [l₁ l₂; m₁ m₂]·(x, y) = −(l₀ + l₃t, m₀ + m₃t).
        var (l0, l1, l2, l3) = (Coefficient(l, [0, 0, 0]), Coefficient(l, [1, 0, 0]), Coefficient(l, [0, 1, 0]), Coefficient(l, [0, 0, 1]));
        var (m0, m1, m2, m3) = (Coefficient(m, [0, 0, 0]), Coefficient(m, [1, 0, 0]), Coefficient(m, [0, 1, 0]), Coefficient(m, [0, 0, 1]));
        var determinant = (l1 * m2) - (l2 * m1);
        return
        [
            ((-l0 * m2) + (m0 * l2)) / determinant,
            ((-l3 * m2) + (m3 * l2)) / determinant,
            ((-m0 * l1) + (l0 * m1)) / determinant,
            ((-m3 * l1) + (l3 * m1)) / determinant,
        ];
    }

    /// <summary>The coefficients of t⁰..t³ in f(a₁ + a₂t, b₁ + b₂t, t), as polynomials in (a₁, a₂, b₁, b₂).</summary>
    private static PolynomialSystem LineSystem(Polynomial cubic)
    {
        // Variables of the substituted polynomial: a₁, a₂, b₁, b₂, t.
        Polynomial V(int index) => Polynomial.Variable(5, index);
        var substituted = cubic.Substitute([V(0).Add(V(1).Multiply(V(4))), V(2).Add(V(3).Multiply(V(4))), V(4)]);
        var byPower = new List<(int[], double)>[4];
        for (var k = 0; k < 4; k++)
        {
            byPower[k] = [];
        }

        for (var term = 0; term < substituted.TermCount; term++)
        {
            var exponents = substituted.ExponentsOf(term);
            byPower[exponents[4]].Add((exponents[..4].ToArray(), substituted.CoefficientOf(term)));
        }

        var equations = byPower.Select(terms => Polynomial.FromTerms(4, terms)).ToArray();
        return new PolynomialSystem(["a1", "a2", "b1", "b2"], [], equations);
    }
}
