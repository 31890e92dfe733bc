using System.Numerics;
using CsCheck;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Fibers;

/// <summary>A solve is a function of its seed: thread count and repetition change nothing, bit for bit.</summary>
public sealed class DeterminismTests
{
    private static readonly Gen<Complex[]> MicrogridPoints =
        Gen.Select(Gen.Double[-1.5, 1.5], Gen.Double[-1.5, 1.5], Gen.Double[-1.5, 1.5], Gen.Double[-0.3, 0.3])
            .Select((p2, p3, p4, im) => new Complex[] { p2, new(p3, im), p4 });

    [Fact]
    public void Total_degree_solve_is_identical_with_one_and_two_threads()
    {
        var family = TestFamilies.Example("microgrid4");
        foreach (var point in SeededDraws.Take(MicrogridPoints, 4_711, 6))
        {
            var single = new FiberSolver(family.System, new SolveOptions { Seed = 17, MaxDegreeOfParallelism = 1 }).SolveTotalDegree(point);
            var dual = new FiberSolver(family.System, new SolveOptions { Seed = 17, MaxDegreeOfParallelism = 2 }).SolveTotalDegree(point);

            AssertIdentical(single, dual);
        }
    }

    [Fact]
    public void Parameter_homotopy_and_start_fiber_are_identical_with_one_and_two_threads()
    {
        var family = TestFamilies.Example("microgrid4");
        var singleSolver = new FiberSolver(family.System, new SolveOptions { Seed = 23, MaxDegreeOfParallelism = 1 });
        var dualSolver = new FiberSolver(family.System, new SolveOptions { Seed = 23, MaxDegreeOfParallelism = 2 });
        var singleStart = singleSolver.CreateStartFiber(family.ContentHash, family.Parameters);
        var dualStart = dualSolver.CreateStartFiber(family.ContentHash, family.Parameters);
        Assert.Equal(singleStart.Parameters, dualStart.Parameters);
        Assert.Equal(singleStart.Solutions.Count, dualStart.Solutions.Count);
        for (var i = 0; i < singleStart.Solutions.Count; i++)
        {
            Assert.Equal(singleStart.Solutions[i], dualStart.Solutions[i]);
        }

        foreach (var point in SeededDraws.Take(MicrogridPoints, 815, 10))
        {
            AssertIdentical(singleSolver.Solve(singleStart, point), dualSolver.Solve(dualStart, point));
        }
    }

    [Fact]
    public void Repeating_a_solve_with_the_same_seed_repeats_it_and_another_seed_finds_the_same_set()
    {
        var family = TestFamilies.Katsura(5);
        var first = new FiberSolver(family.System, new SolveOptions { Seed = 5 }).SolveTotalDegree([]);
        var again = new FiberSolver(family.System, new SolveOptions { Seed = 5 }).SolveTotalDegree([]);
        var otherSeed = new FiberSolver(family.System, new SolveOptions { Seed = 6 }).SolveTotalDegree([]);

        AssertIdentical(first, again);
        // A different γ and chart track different paths, but to the same 32 solutions (Katsura 1990: 2⁵).
        Assert.NotEqual(first.Paths.Select(p => p.Steps), otherSeed.Paths.Select(p => p.Steps));
        SolutionSets.AssertSame([.. first.Solutions.Select(s => s.Values)], [.. otherSeed.Solutions.Select(s => s.Values)], 1e-10, "seeds 5 and 6");
    }

    private static void AssertIdentical(FiberSolution expected, FiberSolution actual)
    {
        Assert.Equal(expected.PathsTracked, actual.PathsTracked);
        for (var i = 0; i < expected.Paths.Count; i++)
        {
            var (a, b) = (expected.Paths[i], actual.Paths[i]);
            Assert.Equal((a.Index, a.Status, a.Failure, a.Steps, a.Rejections, a.CycleNumber), (b.Index, b.Status, b.Failure, b.Steps, b.Rejections, b.CycleNumber));
            Assert.Equal(a.Endpoint, b.Endpoint);
        }

        Assert.Equal(expected.RootCount, actual.RootCount);
        for (var i = 0; i < expected.Solutions.Count; i++)
        {
            // Complex equality is exact: the same bits, not merely close.
            Assert.Equal(expected.Solutions[i].Values, actual.Solutions[i].Values);
            Assert.Equal(expected.Solutions[i].Certificate, actual.Solutions[i].Certificate);
        }

        Assert.Equal((expected.RealCount, expected.RealCountCertified), (actual.RealCount, actual.RealCountCertified));
    }
}
