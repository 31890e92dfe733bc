using System.Globalization;
using System.Numerics;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;
using FindRoots = MathNet.Numerics.FindRoots;

namespace FiberWorkers.Solving.Tests.Fibers;

/// <summary>One unknown: real counts against the cubic's discriminant and Sturm's theorem, roots against MathNet.</summary>
public sealed class UnivariateReferenceTests
{
    [Fact]
    public void Depressed_cubic_real_count_follows_the_sign_of_the_discriminant()
    {
        // Reference: x³ + b·x + c has three distinct real roots iff 4b³ + 27c² < 0 and one iff > 0 (the
        // discriminant −(4b³ + 27c²); Cox, Little & O'Shea, Ideals, Varieties, and Algorithms — REFERENCES.md).
        var family = TestFamilies.Example("cubic");
        var solver = new FiberSolver(family.System);
        var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);
        Assert.Equal(3, start.RootCount);
        var random = new Random(20_251_103);
        var checkedPoints = 0;
        var threeReal = 0;
        var skipped = 0;
        while (checkedPoints < 240)
        {
            var b = random.NextDouble() * 4 - 3;
            var c = random.NextDouble() * 4 - 2;
            var discriminantSign = (4 * b * b * b) + (27 * c * c);
            // Near the discriminant locus two roots nearly coincide; the rule is checked away from it (|·| ≥ 0.05
            // keeps the closest pair of real roots about 0.02 apart or more on this box).
            if (Math.Abs(discriminantSign) < 0.05)
            {
                skipped++;
                continue;
            }

            var fiber = solver.Solve(start, [b, c]);

            var expected = discriminantSign < 0 ? 3 : 1;
            var where = string.Create(CultureInfo.InvariantCulture, $"b = {b:R}, c = {c:R}, 4b³ + 27c² = {discriminantSign:G4}");
            Assert.Equal(0, fiber.StatusCounts[PathStatus.Failed]);
            Assert.True(fiber.RootCount == 3, $"{where}: {fiber.RootCount} roots");
            Assert.True(fiber.RealCount == expected, $"{where}: {fiber.RealCount} real roots, expected {expected}");
            Assert.True(fiber.RealCountCertified, $"{where}: real count not certified");
            foreach (var root in fiber.RealSolutions)
            {
                var x = root.Values[0].Real;
                Assert.True(Math.Abs((x * x * x) + (b * x) + c) < 1e-12 * (1 + Math.Abs(x * x * x)), $"{where}: x = {x:R}");
            }

            threeReal += expected == 3 ? 1 : 0;
            checkedPoints++;
        }

        // Both sides of the locus are exercised, and the exclusion band removes only a sliver of the box.
        Assert.InRange(threeReal, 40, 200);
        Assert.True(skipped < checkedPoints / 10, $"{skipped} points skipped");
    }

    public static TheoryData<int> Degrees() => [.. Enumerable.Range(2, 19)];

    [Theory]
    [MemberData(nameof(Degrees))]
    public void Random_integer_polynomial_real_count_matches_Sturm_and_roots_match_MathNet(int degree)
    {
        // References: the number of distinct real roots by Sturm's theorem (Sturm 1829), computed exactly in
        // integer arithmetic; all complex roots from MathNet.Numerics' companion-matrix eigenvalues
        // (FindRoots.Polynomial) — both named in REFERENCES.md.
        // Instances: integer coefficients uniform in [−9, 9] (seeded), square-free by the exact Sturm chain, and
        // kept only when MathNet's roots are at least 1e-3 apart (relative), so that every root has condition
        // below ~1e8 and a 1e-7 agreement is a fair demand on both sides. Rejections are counted and bounded.
        var random = new Random(7_000 + degree);
        var accepted = 0;
        var rejected = 0;
        while (accepted < 4)
        {
            var coefficients = new long[degree + 1];
            for (var k = 0; k <= degree; k++)
            {
                coefficients[k] = random.Next(-9, 10);
            }

            while (coefficients[degree] == 0)
            {
                coefficients[degree] = random.Next(-9, 10);
            }

            var asDouble = coefficients.Select(c => (double)c).ToArray();
            var reference = FindRoots.Polynomial(asDouble).Select(z => new[] { z }).ToArray();
            if (!SturmSequence.IsSquareFree(coefficients) || SolutionSets.MinimumSeparation(reference) < 1e-3)
            {
                rejected++;
                Assert.True(rejected <= 20, $"degree {degree}: too many near-multiple-root draws");
                continue;
            }

            // The coefficients enter as numbers (a family caps its parameters at 16, below 21 coefficients).
            var terms = asDouble.Select((c, k) => (new[] { k }, c));
            var system = new PolynomialSystem(["x"], [], [Polynomial.FromTerms(1, terms)]);
            var fiber = new FiberSolver(system).SolveTotalDegree([]);

            var where = $"degree {degree}, coefficients (constant first) [{string.Join(", ", coefficients)}]";
            var sturm = SturmSequence.DistinctRealRoots(coefficients);
            Assert.True(fiber.StatusCounts[PathStatus.Regular] == degree, $"{where}: {Statuses(fiber)}");
            Assert.True(fiber.RootCount == degree, $"{where}: {fiber.RootCount} distinct roots");
            Assert.True(fiber.RealCount == sturm, $"{where}: {fiber.RealCount} real roots, Sturm counts {sturm}");
            Assert.True(fiber.RealCountCertified, $"{where}: real count not certified");
            SolutionSets.AssertSame(reference, [.. fiber.Solutions.Select(s => s.Values)], 1e-7, where);
            accepted++;
        }
    }

    [Fact]
    public void Sturm_reference_counts_polynomials_with_known_roots()
    {
        // The test's own Sturm chain against hand-checkable cases (pure algebra, no solver).
        Assert.Equal(3, SturmSequence.DistinctRealRoots([-6, 11, -6, 1]));  // (x − 1)(x − 2)(x − 3)
        Assert.Equal(0, SturmSequence.DistinctRealRoots([1, 0, 1]));        // x² + 1
        Assert.Equal(2, SturmSequence.DistinctRealRoots([-1, 0, 0, 0, 1])); // x⁴ − 1: ±1 and ±i
        Assert.Equal(1, SturmSequence.DistinctRealRoots([-2, 0, 0, -1]));   // −x³ − 2: negative leading coefficient
        Assert.Equal(2, SturmSequence.DistinctRealRoots([1, -3, 0, 4]));    // 4x³ − 3x + 1: roots 1/2 (double) and −1
        Assert.False(SturmSequence.IsSquareFree([1, -3, 0, 4]));            // 4x³ − 3x + 1 = (2x − 1)²(x + 1)
        Assert.True(SturmSequence.IsSquareFree([-6, 11, -6, 1]));
    }

    private static string Statuses(FiberSolution fiber) =>
        string.Join(", ", fiber.StatusCounts.Select(kv => $"{kv.Key} {kv.Value}"));
}
