using System.Numerics;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Fibers;

/// <summary>The parameter homotopy from a start fiber against independent total-degree solves.</summary>
public sealed class ParameterHomotopyTests
{
    // Generic root counts. microgrid4 (complete four-bus network, equal lines): 14, "by an independent Gröbner-basis
    // computation" (REFERENCES.md). microgrid3: 6, the Baillieul–Byrnes bound C(4, 2) for three buses (Baillieul &
    // Byrnes, IEEE Trans. Circuits Syst. 29 (1982) — from memory), attained by a triangle with generic
    // susceptances. two-link-arm: 2, the elbow-up/elbow-down pair (Craig, Introduction to Robotics).
    [Theory]
    [InlineData("microgrid4", 14, 101)]
    [InlineData("microgrid3", 6, 102)]
    [InlineData("two-link-arm", 2, 103)]
    public void Parameter_homotopy_reproduces_the_total_degree_solution_set(string example, int rootCount, int seed)
    {
        var family = TestFamilies.Example(example);
        var solver = new FiberSolver(family.System);
        var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);
        Assert.Equal(rootCount, start.RootCount);
        Assert.Equal("homotopy", start.Provenance.Completeness);
        var random = new Random(seed);
        for (var k = 0; k < 8; k++)
        {
            // Half the targets real (inside the parameter box), half complex (box point plus a complex offset).
            var point = new Complex[family.Parameters.Count];
            for (var j = 0; j < point.Length; j++)
            {
                var box = family.Parameters[j];
                var real = box.Low + (random.NextDouble() * box.Width);
                point[j] = k % 2 == 0 ? real : new Complex(real, 0.5 * RandomSystems.Gaussian(random));
            }

            var viaStart = solver.Solve(start, point);
            var viaTotalDegree = solver.SolveTotalDegree(point);

            var where = $"{example} at ({SolutionSets.Format(point)})";
            Assert.True(viaStart.StatusCounts[PathStatus.Failed] == 0, $"{where}: a parameter path failed");
            Assert.True(viaStart.StatusCounts[PathStatus.Regular] == rootCount, $"{where}: not every parameter path regular");
            Assert.True(viaTotalDegree.RootCount == rootCount, $"{where}: total degree found {viaTotalDegree.RootCount}");
            Assert.True(SolutionSets.MinimumSeparation([.. viaTotalDegree.Solutions.Select(s => s.Values)]) > 1e-4, $"{where}: near-coincident roots");
            SolutionSets.AssertSame(
                [.. viaTotalDegree.Solutions.Select(s => s.Values)], [.. viaStart.Solutions.Select(s => s.Values)], 1e-8, where);
            Assert.Equal(viaTotalDegree.RealCount, viaStart.RealCount);
        }
    }

    [Theory]
    [InlineData("microgrid4", 111)]
    [InlineData("microgrid3", 112)]
    public void Affine_segment_solves_from_a_nearby_complex_fiber_equal_total_degree_solves(string example, int seed)
    {
        // A fiber at a complex point near each real target (a tenth of the box away, as the resolver's relay fibers
        // are), carried along the straight segment with no endgame: every path must arrive, and the set must be the
        // independent total-degree solve's, counts and reality included.
        var family = TestFamilies.Example(example);
        var solver = new FiberSolver(family.System);
        var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);
        var random = new Random(seed);
        for (var k = 0; k < 6; k++)
        {
            var point = new Complex[family.Parameters.Count];
            var near = new Complex[point.Length];
            for (var j = 0; j < point.Length; j++)
            {
                var box = family.Parameters[j];
                point[j] = box.Low + (random.NextDouble() * box.Width);
                near[j] = point[j] + new Complex(0.1 * box.Width * RandomSystems.Gaussian(random), 0.1 * box.Width * RandomSystems.Gaussian(random));
            }

            var relay = solver.Solve(start, near);
            var nearFiber = new FiberWorkers.Solving.StartFibers.StartFiber(start.FamilyHash, start.Unknowns, near, [.. relay.Solutions.Select(s => s.Values)], start.Provenance);
            var along = solver.SolveAlongSegment(nearFiber, point);
            var reference = solver.SolveTotalDegree(point);

            var where = $"{example} at ({SolutionSets.Format(point)})";
            Assert.True(along.Paths.All(p => p.Status == PathStatus.Regular), $"{where}: an affine segment path failed");
            Assert.Equal(start.RootCount, along.RootCount);
            Assert.True(along.RealCountCertified, $"{where}: the real count is not certified");
            SolutionSets.AssertSame([.. reference.Solutions.Select(s => s.Values)], [.. along.Solutions.Select(s => s.Values)], 1e-8, where);
            Assert.Equal(reference.RealCount, along.RealCount);
        }
    }

    [Fact]
    public void Parameter_homotopy_at_the_start_point_returns_the_start_solutions()
    {
        // The homotopy from p₀ to p₀ is constant, so every path must stay where it started.
        var family = TestFamilies.Example("microgrid4");
        var solver = new FiberSolver(family.System);
        var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);

        var fiber = solver.Solve(start, start.Parameters);

        SolutionSets.AssertSame(start.Solutions, [.. fiber.Solutions.Select(s => s.Values)], 1e-12, "p = p₀");
    }

    [Fact]
    public void Failed_paths_are_tracked_again_with_the_tight_settings_when_asked()
    {
        // A step budget of three cannot carry a path across the box, so every path fails with the loose tracker;
        // with RetrackFailed each is run again with the tight settings and the fiber comes out whole.
        var family = TestFamilies.Example("microgrid3");
        var solver = new FiberSolver(family.System, SolveOptions.Default with { MaxDegreeOfParallelism = 1 });
        var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);
        Complex[] point = [.. family.Parameters.Select(p => (Complex)(p.Low + (0.3 * p.Width)))];
        var starved = SolveOptions.Default with { MaxDegreeOfParallelism = 1, Tracker = SolveOptions.Default.Tracker with { MaxSteps = 3 } };

        var lossy = new FiberSolver(family.System, starved).Solve(start, point);
        var retracked = new FiberSolver(family.System, starved with { RetrackFailed = true }).Solve(start, point);
        var reference = solver.Solve(start, point);

        Assert.Equal(start.RootCount, lossy.StatusCounts[PathStatus.Failed]);
        Assert.Equal(0, retracked.StatusCounts[PathStatus.Failed]);
        Assert.All(retracked.Paths, p => Assert.True(p.Retracked));
        SolutionSets.AssertSame(
            [.. reference.Solutions.Select(s => s.Values)], [.. retracked.Solutions.Select(s => s.Values)], 1e-10, "retracked fiber");
    }
}
