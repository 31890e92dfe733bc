using System.Globalization;
using System.Numerics;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Fibers;

/// <summary>Real segments between two parameter points: arrive right inside a region, fail honestly across a fold.</summary>
public sealed class SegmentTrackingTests
{
    // Reference for the two-bus line (B = 1.7): the real operating points of B·sin δ = P are
    // (cos δ, sin δ) = (±√(1 − (P/B)²), P/B) for |P| < B, meeting in a fold at |P| = B (power–angle equation;
    // Grainger & Stevenson, Power System Analysis — REFERENCES.md).
    private const double B = 1.7;

    [Theory]
    [InlineData(0.3, 1.2)]
    [InlineData(-1.5, 1.5)]
    [InlineData(1.65, -1.6)]
    public void Two_bus_solutions_arrive_on_their_own_branch_inside_one_region(double from, double to)
    {
        var family = TestFamilies.Example("two-bus");
        var solver = new FiberSolver(family.System);
        var upper = OperatingPoint(from, +1);
        var lower = OperatingPoint(from, -1);

        var result = solver.TrackSegment([from], [to], [upper, lower]);

        var where = string.Create(CultureInfo.InvariantCulture, $"P {from} → {to}");
        Assert.True(result.AllRegular, $"{where}: {string.Join(", ", result.Paths.Select(p => $"{p.Status} {p.Failure}"))}");
        // The branch is kept: cos δ does not change sign inside the region.
        SolutionSets.AssertSame([OperatingPoint(to, +1)], [result.Paths[0].Endpoint!], 1e-12, where + ", upper branch");
        SolutionSets.AssertSame([OperatingPoint(to, -1)], [result.Paths[1].Endpoint!], 1e-12, where + ", lower branch");
        Assert.All(result.Paths, p => Assert.True(SolutionSets.MaxImaginary(p.Endpoint) < 1e-14));
        Assert.Equal(to, result.Target[0].Real);
    }

    [Theory]
    [InlineData(1.0, 2.2)]
    [InlineData(-0.5, -2.5)]
    [InlineData(1.2, 1.70001)]
    public void Two_bus_paths_fail_instead_of_crossing_the_fold_at_P_equal_B(double from, double to)
    {
        var family = TestFamilies.Example("two-bus");
        var solver = new FiberSolver(family.System);

        var result = solver.TrackSegment([from], [to], [OperatingPoint(from, +1), OperatingPoint(from, -1)]);

        // The fold lies at the fraction (±B − from)/(to − from) of the segment; no real continuation exists past it,
        // so both paths must fail, and not before they got near it.
        var fold = ((Math.Sign(to) * B) - from) / (to - from);
        var where = string.Create(CultureInfo.InvariantCulture, $"P {from} → {to}, fold at {fold:F3}");
        foreach (var path in result.Paths)
        {
            Assert.True(path.Status == PathStatus.Failed, $"{where}: path {path.Index} {path.Status} at ({SolutionSets.Format(path.Endpoint)})");
            Assert.NotEqual(PathFailure.None, path.Failure);
            Assert.True(path.Reached <= fold + 1e-9 && path.Reached > fold - 0.05, $"{where}: stopped at {path.Reached:F6}");
        }

        Assert.False(result.AllRegular);
    }

    [Fact]
    public void Two_bus_segment_ending_on_the_fold_reports_an_ill_conditioned_end()
    {
        // At P = B exactly the two operating points merge into the double root (0, 1): a singular end, which must
        // not come back as two "regular" points. Just before it (P = B − 1e-7) the two points are still 7e-4 apart
        // and well enough conditioned to be regular.
        var family = TestFamilies.Example("two-bus");
        var solver = new FiberSolver(family.System);
        Complex[][] start = [OperatingPoint(1.2, +1), OperatingPoint(1.2, -1)];

        var onFold = solver.TrackSegment([1.2], [B], start);
        var beforeFold = solver.TrackSegment([1.2], [B - 1e-7], start);

        Assert.All(onFold.Paths, p => Assert.Equal((PathStatus.Failed, PathFailure.IllConditionedEnd), (p.Status, p.Failure)));
        Assert.True(beforeFold.AllRegular);
        SolutionSets.AssertSame([OperatingPoint(B - 1e-7, +1)], [beforeFold.Paths[0].Endpoint!], 1e-9, "upper, P = B − 1e-7");
        SolutionSets.AssertSame([OperatingPoint(B - 1e-7, -1)], [beforeFold.Paths[1].Endpoint!], 1e-9, "lower, P = B − 1e-7");
    }

    [Theory]
    [InlineData(B, false)]
    [InlineData(B - 1e-7, true)]
    public void Ends_judged_from_their_certificates_fail_and_arrive_as_the_estimated_ones_do(double to, bool regular)
    {
        // With one Newton step at the end and no estimate of κ, SolveAlongSegment applies the end-condition limit to
        // the certificates' exact κ: on the fold both ends still fail as ill-conditioned, just before it both arrive,
        // certified, at the reference points (as in the estimated case above).
        var family = TestFamilies.Example("two-bus");
        var solver = new FiberSolver(family.System);
        var start = new StartFiber(family.ContentHash, family.Unknowns, [1.2], [OperatingPoint(1.2, +1), OperatingPoint(1.2, -1)],
            new StartFiberProvenance("test", 0, 2, "segment", string.Empty));
        var judged = Solving.Tracking.TrackerOptions.Default with { EndNewtonSteps = 1, EstimateEndCondition = false };

        var estimated = solver.SolveAlongSegment(start, [to]);
        var certified = solver.SolveAlongSegment(start, [to], judged);

        Assert.Equal(estimated.Paths.Select(p => (p.Status, p.Failure)), certified.Paths.Select(p => (p.Status, p.Failure)));
        Assert.All(certified.Paths, p => Assert.Equal(regular ? PathStatus.Regular : PathStatus.Failed, p.Status));
        if (regular)
        {
            Assert.Equal(2, certified.Solutions.Count);
            Assert.All(certified.Solutions, s => Assert.True(s.Certified && s.Condition <= solver.EndConditionLimit));
            SolutionSets.AssertSame([OperatingPoint(to, +1), OperatingPoint(to, -1)], [.. certified.Solutions.Select(s => s.Values)], 1e-9, "one Newton step at the end");
        }
        else
        {
            Assert.All(certified.Paths, p => Assert.Equal(PathFailure.IllConditionedEnd, p.Failure));
            Assert.Empty(certified.Solutions);
        }
    }

    [Fact]
    public void Two_link_arm_segment_inside_the_annulus_keeps_both_assembly_modes()
    {
        // Reference: the elbow angle φ = θ₂ − θ₁ of a two-link arm with cos φ = (r² − L₁² − L₂²)/(2L₁L₂) and the two
        // modes ±φ (Craig, Introduction to Robotics — REFERENCES.md); L₁ = 1, L₂ = 0.6. The segment from (0.5, 0.6)
        // to (−0.3, 1.1) stays inside 0.4 < r < 1.6.
        var family = TestFamilies.Example("two-link-arm");
        var solver = new FiberSolver(family.System);
        Complex[] from = [0.5, 0.6];
        Complex[] to = [-0.3, 1.1];

        var result = solver.TrackSegment(from, to, [ArmSolution(0.5, 0.6, +1), ArmSolution(0.5, 0.6, -1)]);

        Assert.True(result.AllRegular);
        SolutionSets.AssertSame([ArmSolution(-0.3, 1.1, +1)], [result.Paths[0].Endpoint!], 1e-12, "elbow +");
        SolutionSets.AssertSame([ArmSolution(-0.3, 1.1, -1)], [result.Paths[1].Endpoint!], 1e-12, "elbow −");
    }

    [Fact]
    public void Two_link_arm_segment_leaving_the_annulus_fails_at_the_outer_circle()
    {
        // From r ≈ 1.17 to r ≈ 1.84: the two modes merge where the arm is stretched out (r = L₁ + L₂ = 1.6).
        var family = TestFamilies.Example("two-link-arm");
        var solver = new FiberSolver(family.System);

        var result = solver.TrackSegment([0.6, 1.0], [1.3, 1.3], [ArmSolution(0.6, 1.0, +1), ArmSolution(0.6, 1.0, -1)]);

        Assert.All(result.Paths, p => Assert.Equal(PathStatus.Failed, p.Status));
    }

    private static Complex[] OperatingPoint(double power, int branch)
    {
        var s = power / B;
        return [branch * Math.Sqrt(1 - (s * s)), s];
    }

    /// <summary>(cos θ₁, sin θ₁, cos θ₂, sin θ₂) reaching (x, y) with elbow sign <paramref name="mode"/>.</summary>
    private static Complex[] ArmSolution(double x, double y, int mode)
    {
        const double l1 = 1.0;
        const double l2 = 0.6;
        var r2 = (x * x) + (y * y);
        var elbow = mode * Math.Acos((r2 - (l1 * l1) - (l2 * l2)) / (2 * l1 * l2));
        var theta1 = Math.Atan2(y, x) - Math.Atan2(l2 * Math.Sin(elbow), l1 + (l2 * Math.Cos(elbow)));
        var theta2 = theta1 + elbow;
        return [Math.Cos(theta1), Math.Sin(theta1), Math.Cos(theta2), Math.Sin(theta2)];
    }
}
