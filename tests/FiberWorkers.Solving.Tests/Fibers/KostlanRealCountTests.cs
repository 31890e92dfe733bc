using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Tests.References;

namespace FiberWorkers.Solving.Tests.Fibers;

/// <summary>The mean real count of Kostlan random systems against its closed form.</summary>
public sealed class KostlanRealCountTests
{
    [Fact]
    public void Mean_real_count_of_Kostlan_systems_with_n_2_and_d_3_is_3()
    {
        // Reference: for n random equations of degree d whose coefficient of x^a is an independent normal with
        // variance d!/(a₁!···aₙ!(d − |a|)!), the expected number of real solutions is d^(n/2) (Shub & Smale,
        // "Complexity of Bézout's theorem II" (1993); Kostlan (1993) — REFERENCES.md). Here n = 2, d = 3: 3.
        // The affine real count equals the count in real projective space almost surely (no real solution at
        // infinity). Tolerance: 4 standard errors of the sample mean (sample standard deviation / √count), a
        // two-sided ~6e-5 chance for a correct solver; the seed is fixed, so the test is deterministic.
        const int systems = 300;
        const int degree = 3;
        var random = new Random(3_300_113);
        var counts = new int[systems];
        for (var k = 0; k < systems; k++)
        {
            var equations = new[]
            {
                RandomSystems.Dense(2, degree, random, a => RandomSystems.Multinomial(degree, a)),
                RandomSystems.Dense(2, degree, random, a => RandomSystems.Multinomial(degree, a)),
            };
            var system = new PolynomialSystem(["x", "y"], [], equations);

            var fiber = new FiberSolver(system).SolveTotalDegree([]);

            Assert.True(fiber.StatusCounts[PathStatus.Failed] == 0, $"system {k}: failed paths");
            Assert.True(fiber.RootCount == 9, $"system {k}: {fiber.RootCount} solutions, Bézout 9");
            Assert.True(fiber.RealCountCertified, $"system {k}: real count not certified");
            counts[k] = fiber.RealCount;
        }

        var mean = counts.Average();
        var variance = counts.Sum(c => (c - mean) * (c - mean)) / (systems - 1);
        var standardError = Math.Sqrt(variance / systems);
        Assert.True(standardError is > 0.02 and < 0.2, $"standard error {standardError}: the sample is degenerate");
        Assert.True(Math.Abs(mean - 3) <= 4 * standardError, $"mean real count {mean:F3}, expected 3 ± {4 * standardError:F3}");
        // Real counts of a real system of Bézout number 9 are odd (non-real solutions pair up) and at most 9.
        Assert.All(counts, c => Assert.True(c % 2 == 1 && c <= 9, $"real count {c}"));
    }
}
