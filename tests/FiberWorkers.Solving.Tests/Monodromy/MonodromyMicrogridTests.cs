using FiberWorkers.Algebra.Families;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Monodromy;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Monodromy;

/// <summary>
/// Lossless power flow on complete four- and five-bus networks with unit voltages: monodromy reaches the same
/// generic root count as a total-degree solve at the same complex point, never above C(2n − 2, n − 1)
/// (Baillieul &amp; Byrnes, IEEE Trans. Circuits Syst. 29 (1982), from memory), with equal and with unequal lines.
/// </summary>
public sealed class MonodromyMicrogridTests
{
    /// <summary>Line susceptances of our own, all different on five buses: 0.6 + 0.1·((3i + 5j) mod 7).</summary>
    public static double UnequalLine(int i, int j) => 0.6 + (0.1 * (((3 * i) + (5 * j)) % 7));

    public static FamilyDefinition FiveBusUnequal { get; } = TestFamilies.CompleteMicrogrid(5, UnequalLine);

    [Fact]
    public void Four_buses_with_equal_lines_have_14_solutions_by_both_methods()
    {
        // Equal lines are special: 14 at generic injections, below the bound of C(6, 3) = 20, by an independent
        // Gröbner-basis computation (REFERENCES.md, Baillieul & Byrnes row).
        var family = TestFamilies.CompleteMicrogrid(4, (_, _) => 1.0);

        var (monodromy, totalDegree) = BothMethods(family, seed: 4_401);

        Assert.Equal(14, totalDegree.RootCount);
        Assert.Equal(14, monodromy.RootCount);
        SolutionSets.AssertSame([.. totalDegree.Solutions.Select(s => s.Values)], monodromy.Solutions, 1e-8, "four buses, equal lines");
    }

    [Fact]
    public void Four_buses_with_unequal_lines_reach_the_same_count_by_both_methods_within_the_bound()
    {
        var family = TestFamilies.CompleteMicrogrid(4, UnequalLine);

        var (monodromy, totalDegree) = BothMethods(family, seed: 4_402);

        Assert.Equal(totalDegree.RootCount, monodromy.RootCount);
        Assert.InRange(monodromy.RootCount, 1, 20);
        // Our computation, not an outside value: with these lines both methods find 20, the bound itself.
        Assert.Equal(20, monodromy.RootCount);
        SolutionSets.AssertSame([.. totalDegree.Solutions.Select(s => s.Values)], monodromy.Solutions, 1e-8, "four buses, unequal lines");
    }

    [Fact]
    public void Five_buses_with_equal_lines_reach_the_same_count_by_both_methods_below_the_bound()
    {
        var family = TestFamilies.CompleteMicrogrid(5, (_, _) => 1.0);

        var (monodromy, totalDegree) = BothMethods(family, seed: 5_501);

        Assert.Equal(totalDegree.RootCount, monodromy.RootCount);
        // Our computation, not an outside value: equal lines are special here too, 30 solutions against the
        // bound C(8, 4) = 70.
        Assert.Equal(30, monodromy.RootCount);
        SolutionSets.AssertSame([.. totalDegree.Solutions.Select(s => s.Values)], monodromy.Solutions, 1e-8, "five buses, equal lines");
    }

    [Fact]
    public void Five_buses_with_unequal_lines_reach_the_same_count_by_both_methods_within_the_bound()
    {
        var (monodromy, totalDegree) = BothMethods(FiveBusUnequal, seed: 5_502);

        Assert.Equal(totalDegree.RootCount, monodromy.RootCount);
        Assert.InRange(monodromy.RootCount, 1, 70);
        // Our computation, not an outside value: with these lines both methods find 70, the bound itself.
        Assert.Equal(70, monodromy.RootCount);
        SolutionSets.AssertSame([.. totalDegree.Solutions.Select(s => s.Values)], monodromy.Solutions, 1e-8, "five buses, unequal lines");
    }

    [Theory]
    [InlineData(4, 20, 4_411)]
    [InlineData(4, 20, 4_412)]
    [InlineData(5, 70, 5_511)]
    public void Unequal_lines_stop_by_a_passed_trace_test_at_the_bound(int buses, int bound, int seed)
    {
        // Without a total-degree solve to compare with, the trace test is what vouches for completeness; further
        // seeds of our own show the count does not depend on the seed.
        var family = TestFamilies.CompleteMicrogrid(buses, UnequalLine);

        var result = Monodromy(family, seed);

        Assert.Equal(bound, result.Fiber.RootCount);
        Assert.Equal("trace-test", result.Fiber.Provenance.Completeness);
        Assert.True(result.Monodromy!.TraceTest!.Passed);
    }

    [Theory]
    [InlineData(100)]
    [InlineData(117)]
    [InlineData(125)]
    public void Base_points_with_a_group_of_large_solutions_still_reach_all_70(int seed)
    {
        // At these seeds' base points 5 to 10 of the 70 solutions (bound C(8, 4), Baillieul & Byrnes 1982, from
        // memory) are large, and triangles of the base point's own size mix them with the others only now and
        // then; the search used to give up at 60 to 69. Wider loops after a loop that finds nothing, and more
        // patience while the trace test fails, reach them.
        var family = TestFamilies.Example("microgrid5");

        var result = Monodromy(family, seed);

        Assert.Equal(70, result.Fiber.RootCount);
        Assert.Equal("trace-test", result.Fiber.Provenance.Completeness);
    }

    [Fact]
    public void A_final_homotopy_that_passes_near_a_branch_point_takes_a_detour_and_keeps_every_solution()
    {
        // At this seed two paths of the straight homotopy from the augmented base point to q = 0 meet near a
        // branch point and fail together; the fiber then lost 2 of its 30 (the count both methods find for five
        // equal lines, above). The whole fiber takes a detour through a random point, and the union has all 30.
        // (The family itself needs no constants, so they are asked for here.)
        var family = TestFamilies.CompleteMicrogrid(5, (_, _) => 1.0);

        var result = Monodromy(family, seed: 2_096, options: MonodromyOptions.Default with { OwnFiberPlacement = false });

        Assert.True(result.Monodromy!.Augmented);

        Assert.Equal(30, result.Monodromy!.BaseRootCount);
        Assert.Equal(30, result.Fiber.RootCount);
        Assert.True(result.Monodromy.FinalPaths > result.Monodromy.BaseRootCount, "the detour's paths are counted");
        Assert.True(SolutionSets.MinimumSeparation(result.Fiber.Solutions) > 1e-6);
    }

    /// <summary>The monodromy start fiber and a total-degree solve at its own point p₀.</summary>
    internal static (StartFiber Monodromy, FiberSolution TotalDegree) BothMethods(FamilyDefinition family, int seed)
    {
        var start = Monodromy(family, seed).Fiber;
        var totalDegree = new FiberSolver(family.System, new SolveOptions { Seed = seed }).SolveTotalDegree(start.Parameters);
        // Every total-degree path must end somewhere definite, or its count proves nothing.
        Assert.Equal(0, totalDegree.StatusCounts[PathStatus.Failed]);
        Assert.True(SolutionSets.MinimumSeparation([.. totalDegree.Solutions.Select(s => s.Values)]) > 1e-6);
        return (start, totalDegree);
    }

    internal static StartFiberResult Monodromy(FamilyDefinition family, int seed, int threads = 2, MonodromyOptions? options = null) =>
        StartFiberFactory.Create(
            family.System,
            family.ContentHash,
            family.Parameters,
            StartFiberMethod.Monodromy,
            new SolveOptions { Seed = seed, MaxDegreeOfParallelism = threads },
            options);
}
