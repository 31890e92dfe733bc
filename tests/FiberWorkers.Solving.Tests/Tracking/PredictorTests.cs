using System.Numerics;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Solving.Tracking;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Tracking;

public sealed class PredictorTests
{
    [Fact]
    public void The_Hermite_predictor_reaches_the_same_solutions_as_Runge_Kutta()
    {
        // Same start fiber, same targets: the two predictors must land on the same solution sets (the paths are
        // the same curves; only the way along them differs).
        var family = TestFamilies.Example("microgrid4");
        var rungeKutta = new FiberSolver(family.System, SolveOptions.Default with { MaxDegreeOfParallelism = 1 });
        var hermite = new FiberSolver(
            family.System,
            SolveOptions.Default with { MaxDegreeOfParallelism = 1, Tracker = TrackerOptions.Default with { Predictor = Predictor.Hermite } });
        var start = rungeKutta.CreateStartFiber(family.ContentHash, family.Parameters);
        var random = new Random(41);
        for (var trial = 0; trial < 12; trial++)
        {
            var point = family.Parameters.Select(p => new Complex(p.Low + (p.Width * random.NextDouble()), 0)).ToArray();
            var a = rungeKutta.Solve(start, point);
            var b = hermite.Solve(start, point);
            Assert.Equal(0, b.StatusCounts[PathStatus.Failed]);
            Assert.Equal(a.RealCount, b.RealCount);
            SolutionSets.AssertSame(a.Solutions.Select(s => s.Values).ToList(), b.Solutions.Select(s => s.Values).ToList(), 1e-8, $"trial {trial}");
        }
    }
}
