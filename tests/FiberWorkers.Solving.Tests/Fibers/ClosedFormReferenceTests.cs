using System.Globalization;
using System.Numerics;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Fibers;

/// <summary>Bundled examples whose real solutions are known in closed form from their engineering textbooks.</summary>
public sealed class ClosedFormReferenceTests
{
    private const double L1 = 1.0;
    private const double L2 = 0.6;
    private const double B = 1.7;

    [Fact]
    public void Two_link_arm_has_two_real_solutions_inside_the_annulus_and_none_outside()
    {
        // Reference: a planar arm with links L₁ = 1, L₂ = 0.6 reaches a target at distance r in exactly two
        // configurations (elbow up and down) iff |L₁ − L₂| < r < L₁ + L₂, i.e. 0.4 < r < 1.6, and in none outside;
        // the elbow angle obeys the law of cosines cos(θ₂ − θ₁) = (r² − L₁² − L₂²)/(2L₁L₂) (standard robot
        // kinematics: Craig, Introduction to Robotics — REFERENCES.md).
        var family = TestFamilies.Example("two-link-arm");
        Assert.Equal(L1, family.Constants["L1"]);
        Assert.Equal(L2, family.Constants["L2"]);
        var solver = new FiberSolver(family.System);
        var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);
        Assert.Equal(2, start.RootCount);
        var random = new Random(41_017);
        var inside = 0;
        var outside = 0;
        while (inside + outside < 120)
        {
            var r = random.NextDouble() * 2.4;
            var angle = random.NextDouble() * 2 * Math.PI;
            // Away from the boundary circles, where the two configurations merge (|r − circle| ≥ 0.01), and from
            // the base itself, where (with L₁ ≠ L₂) even the complex solutions go to infinity.
            if (Math.Abs(r - (L1 - L2)) < 0.01 || Math.Abs(r - (L1 + L2)) < 0.01 || r < 0.01)
            {
                continue;
            }

            var (x, y) = (r * Math.Cos(angle), r * Math.Sin(angle));
            var fiber = solver.Solve(start, [x, y]);

            var reachable = r > L1 - L2 && r < L1 + L2;
            var where = string.Create(CultureInfo.InvariantCulture, $"target ({x:R}, {y:R}), r = {r:F4}");
            Assert.True(fiber.StatusCounts[PathStatus.Failed] == 0, $"{where}: failed paths");
            Assert.True(fiber.RootCount == 2, $"{where}: {fiber.RootCount} solutions");
            Assert.True(fiber.RealCount == (reachable ? 2 : 0), $"{where}: {fiber.RealCount} real solutions");
            Assert.True(fiber.RealCountCertified, $"{where}: not certified");
            var elbowCosine = ((r * r) - (L1 * L1) - (L2 * L2)) / (2 * L1 * L2);
            foreach (var solution in fiber.RealSolutions)
            {
                var (c1, s1, c2, s2) = (solution.Values[0].Real, solution.Values[1].Real, solution.Values[2].Real, solution.Values[3].Real);
                Assert.True(Math.Abs((c1 * c2) + (s1 * s2) - elbowCosine) < 1e-10, $"{where}: elbow cosine");
                Assert.True(Math.Abs((L1 * c1) + (L2 * c2) - x) < 1e-12 && Math.Abs((L1 * s1) + (L2 * s2) - y) < 1e-12, $"{where}: hand");
            }

            if (reachable)
            {
                // The two configurations are mirror images: elbow sines sin(θ₂ − θ₁) of opposite sign.
                var sines = fiber.RealSolutions
                    .Select(s => (s.Values[0].Real * s.Values[3].Real) - (s.Values[1].Real * s.Values[2].Real)).Order().ToArray();
                Assert.True(Math.Abs(sines[0] + sines[1]) < 1e-10 && sines[1] > 0, $"{where}: elbow sines {sines[0]}, {sines[1]}");
                inside++;
            }
            else
            {
                outside++;
            }
        }

        Assert.True(inside >= 30 && outside >= 30, $"{inside} inside, {outside} outside");
    }

    [Fact]
    public void Two_bus_line_has_two_real_operating_points_iff_the_injection_is_below_the_susceptance()
    {
        // Reference: the lossless power–angle equation B·sin δ = P with unit voltages has the two real solutions
        // sin δ = P/B, cos δ = ±√(1 − (P/B)²) iff |P| < B, and only the complex pair cos δ = ±i·√((P/B)² − 1)
        // beyond (Grainger & Stevenson, Power System Analysis — REFERENCES.md). Here B = 1.7.
        var family = TestFamilies.Example("two-bus");
        Assert.Equal(B, family.Constants["B"]);
        var solver = new FiberSolver(family.System);
        var start = solver.CreateStartFiber(family.ContentHash, family.Parameters);
        var random = new Random(5_309);
        var below = 0;
        for (var k = 0; k < 120; k++)
        {
            var power = random.NextDouble() * 6 - 3;
            if (Math.Abs(Math.Abs(power) - B) < 0.01)
            {
                continue;
            }

            var fiber = solver.Solve(start, [power]);

            var where = string.Create(CultureInfo.InvariantCulture, $"P = {power:R}");
            var s = power / B;
            var c = Complex.Sqrt(1 - (s * s));
            Complex[][] expected = [[c, s], [-c, s]];
            Assert.True(fiber.RealCount == (Math.Abs(power) < B ? 2 : 0), $"{where}: {fiber.RealCount} real");
            Assert.True(fiber.RealCountCertified, $"{where}: not certified");
            SolutionSets.AssertSame(expected, [.. fiber.Solutions.Select(p => p.Values)], 1e-12, where);
            below += Math.Abs(power) < B ? 1 : 0;
        }

        Assert.InRange(below, 40, 90);
    }
}
