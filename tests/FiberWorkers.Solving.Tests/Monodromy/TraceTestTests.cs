using System.Numerics;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Monodromy;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Monodromy;

/// <summary>
/// The linear trace test (Leykin, Rodriguez &amp; Sottile 2018): the sum of the points of a complete fiber moves
/// affinely along a pencil of parallel slices, and a fiber with a solution left out does not.
/// </summary>
public sealed class TraceTestTests
{
    private const double Tolerance = 1e-7;

    /// <summary>A deviation this many times the tolerance is "well above" it: one missing solution, not rounding.</summary>
    private const double WellAbove = 1e3;

    [Theory]
    [InlineData(4)]
    [InlineData(5)]
    [InlineData(6)]
    public void Katsura_fiber_passes_and_fails_with_one_solution_removed(int n)
    {
        // Katsura-n has 2ⁿ solutions, all finite and nonsingular (Katsura 1990 — REFERENCES.md); the
        // total-degree fiber is checked to have all of them before it serves as the complete fiber.
        var family = TestFamilies.Katsura(n);
        var fiber = new FiberSolver(family.System, new SolveOptions { Seed = 404 }).SolveTotalDegree([]);
        Assert.Equal(1 << n, fiber.RootCount);

        AssertPassesAndDetectsRemoval(family.System, [], [.. fiber.Solutions.Select(s => s.Values)], seed: 4_040 + (ulong)n);
    }

    [Fact]
    public void Cyclic_6_fiber_with_constant_parameters_passes_and_fails_with_one_solution_removed()
    {
        // Cyclic-6 has 156 isolated solutions (Björck & Fröberg 1991 — REFERENCES.md); the perturbed family keeps
        // 156 at a generic point. The monodromy fiber is checked to have them all before it is used.
        var family = TestFamilies.Cyclic(6, withConstantParameters: true);
        var start = StartFiberFactory.Create(
            family.System, family.ContentHash, family.Parameters, StartFiberMethod.Monodromy, new SolveOptions { Seed = 606 }).Fiber;
        Assert.Equal(156, start.RootCount);

        AssertPassesAndDetectsRemoval(family.System, start.Parameters, start.Solutions, seed: 6_060);
    }

    [Fact]
    public void Five_bus_fiber_with_unequal_lines_passes_and_fails_with_one_solution_removed()
    {
        // At most C(8, 4) = 70 operating points (Baillieul & Byrnes 1982, from memory): a fiber of 70 distinct
        // solutions is complete. The trace test runs on the family itself at p₀, not on the augmented system
        // monodromy used.
        var family = MonodromyMicrogridTests.FiveBusUnequal;
        var start = MonodromyMicrogridTests.Monodromy(family, seed: 505).Fiber;
        Assert.Equal(70, start.RootCount);

        AssertPassesAndDetectsRemoval(family.System, start.Parameters, start.Solutions, seed: 5_050);
    }

    [Fact]
    public void An_empty_fiber_is_skipped_with_a_reason()
    {
        var family = TestFamilies.Katsura(3);

        var (result, skipped) = new TraceTest(family.System, SolveOptions.Default, Tolerance).Run([], [], new SeededRandom(33));

        Assert.Null(result);
        Assert.Equal("the fiber is empty", skipped);
    }

    private static void AssertPassesAndDetectsRemoval(
        PolynomialSystem system, Complex[] parameters, IReadOnlyList<Complex[]> fiber, ulong seed)
    {
        var test = new TraceTest(system, new SolveOptions { Seed = (int)seed }, Tolerance);

        var (complete, skipped) = test.Run(parameters, fiber, new SeededRandom(seed));

        Assert.Null(skipped);
        Assert.NotNull(complete);
        Assert.True(complete.Passed, $"complete fiber of {fiber.Count}: relative deviation {complete.RelativeDeviation:E2}");
        Assert.InRange(complete.RelativeDeviation, 0, Tolerance);
        Assert.Equal(2L * fiber.Count, test.PathsTracked);

        // Leave out the first, a middle and the last solution in turn; the same slices (same seed) are used.
        foreach (var removed in new[] { 0, fiber.Count / 2, fiber.Count - 1 })
        {
            var partial = fiber.Where((_, i) => i != removed).ToArray();

            var (result, why) = test.Run(parameters, partial, new SeededRandom(seed));

            Assert.Null(why);
            Assert.NotNull(result);
            Assert.False(result.Passed);
            Assert.True(
                result.RelativeDeviation > WellAbove * Tolerance,
                $"solution {removed} of {fiber.Count} removed: relative deviation {result.RelativeDeviation:E2}, expected above {WellAbove * Tolerance:E0}");
        }
    }
}
