using System.Numerics;
using CsCheck;
using FiberWorkers.Solving.Certification;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Tests.References;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Certification;

/// <summary>Smale's alpha test and the reality verdicts, against direct Newton iteration and known solutions.</summary>
public sealed class AlphaCertifierTests
{
    // (13 − 3√17)/4 ≈ 0.157671: α below it makes x an approximate zero (Smale 1986; Blum, Cucker, Shub & Smale,
    // Complexity and Real Computation (1998) — REFERENCES.md). Computed here, not taken from the solver.
    private static readonly double SmaleBound = (13 - (3 * Math.Sqrt(17))) / 4;

    [Theory]
    [InlineData("katsura-6")]
    [InlineData("microgrid4")]
    [InlineData("cyclic-5")]
    public void Certified_solutions_have_alpha_below_Smales_constant(string name)
    {
        var family = name switch
        {
            "katsura-6" => TestFamilies.Katsura(6),
            "cyclic-5" => TestFamilies.Cyclic(5),
            _ => TestFamilies.Example(name),
        };
        Complex[] point = family.Parameters.Count == 0 ? [] : [0.31, -0.72, 0.18];

        var fiber = new FiberSolver(family.System).SolveTotalDegree(point);

        Assert.NotEmpty(fiber.Solutions);
        Assert.Equal(0.157671, SmaleBound, 6);
        foreach (var solution in fiber.Solutions.Where(s => s.Certified))
        {
            var c = solution.Certificate;
            Assert.True(c.ApproximateZero && c.Alpha < SmaleBound, $"α = {c.Alpha}");
            Assert.True(c.Alpha >= 0 && c.Beta >= 0 && c.Gamma > 0 && Math.Abs(c.Alpha - (c.Beta * c.Gamma)) <= 1e-12 * c.Alpha + 1e-300);
        }

        Assert.True(fiber.Solutions.Count(s => s.Certified) == fiber.RootCount, "every solution of these generic systems certifies");
    }

    [Fact]
    public void A_point_a_hundredth_off_a_clustered_root_is_not_an_approximate_zero()
    {
        // Our own cubic x(x − 0.03)(x − 1) = x³ − 1.03x² + 0.03x. From x = 0.01 (1e-2 off the root 0) Newton moves
        // away: the first step lands at about −0.0104, further from 0 than x itself and farther still from 0.03 and
        // 1, so x violates Smale's definition ‖N(x) − ζ‖ ≤ ½‖x − ζ‖ for every zero ζ. The certifier must say so.
        var family = TestFamilies.Build("clustered cubic", ["x"], ["x^3 - 1.03*x^2 + 0.03*x"]);
        var solver = new FiberSolver(family.System);
        var newton = new ReferenceNewton(family.System, []);
        Complex[] perturbed = [0.01];
        var next = newton.Step(perturbed);
        foreach (var zero in new[] { 0.0, 0.03, 1.0 })
        {
            Assert.True(Complex.Abs(next[0] - zero) > 0.5 * Complex.Abs(perturbed[0] - zero), $"ζ = {zero}: N(x) = {next[0]}");
        }

        var certified = solver.Certify([], [(0, perturbed), (1, [0.0]), (2, [0.03]), (3, [1.0])]);

        Assert.False(certified[0].Certificate.ApproximateZero);
        Assert.False(certified[0].Certified);
        Assert.Equal(Reality.Undecided, certified[0].Certificate.Reality);
        // The exact roots themselves (representable or within an ulp) do certify, and are distinct and real.
        Assert.All(certified.Skip(1), p => Assert.True(p.Certified && p.Certificate.Reality == Reality.Real, $"x = {p.Values[0]}"));
    }

    [Fact]
    public void Every_certified_point_is_an_approximate_zero_of_a_nearby_zero()
    {
        // Property (the definition behind α < 0.1577, Smale 1986): when the certifier calls x an approximate zero,
        // Newton from x converges to a zero ζ with ‖x − ζ‖ ≤ 2β and ‖Nᵏ(x) − ζ‖ ≤ 2^(1 − 2ᵏ)‖x − ζ‖. Checked with
        // the test's own Newton iteration (symbolic derivatives, MathNet LU) on Katsura-4 solutions moved by
        // 1e-9 .. 1e-1 in seeded random complex directions; a rounding floor of 1e-13 is allowed in each bound.
        var family = TestFamilies.Katsura(4);
        var solver = new FiberSolver(family.System);
        var solutions = solver.SolveTotalDegree([]).Solutions;
        var newton = new ReferenceNewton(family.System, []);
        var n = family.System.UnknownCount;
        var perturbation = Gen.Select(
            Gen.Int[0, solutions.Count - 1], Gen.Double[-9, -1], Gen.Double[-1, 1].Array[2 * n]);
        var approximateZeros = 0;
        var rejected = 0;
        foreach (var (index, logSize, direction) in SeededDraws.Take(perturbation, 60_221, 150))
        {
            var norm = Math.Sqrt(direction.Sum(d => d * d));
            if (norm == 0)
            {
                continue;
            }

            var scale = Math.Pow(10, logSize) / norm;
            var x = new Complex[n];
            for (var i = 0; i < n; i++)
            {
                x[i] = solutions[index].Values[i] + (scale * new Complex(direction[2 * i], direction[(2 * i) + 1]));
            }

            var certificate = solver.Certify([], [(0, x)])[0].Certificate;
            if (!certificate.ApproximateZero)
            {
                rejected++;
                continue;
            }

            approximateZeros++;
            var iterates = newton.Iterates(x, 12);
            var zero = iterates[^1];
            var initial = ReferenceNewton.Distance(x, zero);
            Assert.True(initial <= (2 * certificate.Beta) + 1e-13, $"‖x − ζ‖ = {initial:G3} > 2β = {2 * certificate.Beta:G3}");
            for (var k = 1; k <= 3; k++)
            {
                var bound = Math.Pow(2, 1 - Math.Pow(2, k)) * initial;
                var distance = ReferenceNewton.Distance(iterates[k - 1], zero);
                Assert.True(distance <= bound + 1e-13, $"k = {k}: {distance:G3} > {bound:G3} (start {initial:G3})");
            }
        }

        // Both verdicts occur: small moves certify, the largest do not.
        Assert.True(approximateZeros >= 30 && rejected >= 10, $"{approximateZeros} certified, {rejected} rejected");
    }

    [Fact]
    public void Reality_verdicts_match_the_imaginary_parts_of_known_solutions()
    {
        // Two-bus line, B = 1.7 (power–angle equation; Grainger & Stevenson): at P = 1 the solutions
        // (±√(1 − (P/B)²), P/B) are real; at P = 2.5 they are (±i·√((P/B)² − 1), P/B), a non-real pair.
        var family = TestFamilies.Example("two-bus");
        var solver = new FiberSolver(family.System);
        var (s1, s2) = (1.0 / 1.7, 2.5 / 1.7);
        var c1 = Math.Sqrt(1 - (s1 * s1));
        var c2 = Math.Sqrt((s2 * s2) - 1);

        var real = solver.Certify([1.0], [(0, [c1, s1]), (1, [-c1, s1])]);
        var nonReal = solver.Certify([2.5], [(0, [new Complex(0, c2), s2]), (1, [new Complex(0, -c2), s2])]);

        Assert.All(real, p => Assert.True(p.Certified && p.Certificate.Reality == Reality.Real && p.IsReal));
        Assert.All(nonReal, p => Assert.True(p.Certified && p.Certificate.Reality == Reality.NonReal && !p.IsReal));
    }

    [Fact]
    public void Certificates_at_a_point_do_not_depend_on_what_the_thread_certified_before()
    {
        // The solver reuses the thread's last certifier for the same parameter point. Interleaving points of the
        // two-bus line (P = 1: a real pair; P = 2.5: a non-real pair) with another solver of the same family must give
        // exactly the verdicts and figures of a fresh solver at each point.
        var family = TestFamilies.Example("two-bus");
        var (s1, s2) = (1.0 / 1.7, 2.5 / 1.7);
        var c1 = Math.Sqrt(1 - (s1 * s1));
        var c2 = Math.Sqrt((s2 * s2) - 1);
        (int, Complex[])[] real = [(0, [c1, s1]), (1, [-c1, s1])];
        (int, Complex[])[] nonReal = [(0, [new Complex(0, c2), s2]), (1, [new Complex(0, -c2), s2])];
        var reused = new FiberSolver(family.System);
        var other = new FiberSolver(family.System);

        var sequence = new[] { (1.0, real), (1.0, real), (2.5, nonReal), (1.0, real), (2.5, nonReal), (2.5, nonReal) };
        foreach (var (power, points) in sequence)
        {
            other.Certify([power == 1.0 ? 2.5 : 1.0], power == 1.0 ? nonReal : real);
            var got = reused.Certify([power], points);
            var fresh = new FiberSolver(family.System).Certify([power], points);
            for (var i = 0; i < got.Count; i++)
            {
                Assert.Equal(fresh[i].Certificate, got[i].Certificate);
                Assert.Equal(fresh[i].Residual, got[i].Residual);
                Assert.Equal(fresh[i].Condition, got[i].Condition);
                Assert.Equal(power == 1.0 ? Reality.Real : Reality.NonReal, got[i].Certificate.Reality);
            }
        }
    }

    [Fact]
    public void A_complex_pair_with_a_tiny_imaginary_part_is_certified_non_real_not_real()
    {
        // Our own cubic (x − 1)((x − 2)² + 1e-6) has roots 1 and 2 ± 0.001i: the pair is 0.002 from its own
        // conjugate, far more than 4β at a refined point, so it must come out non-real, and never real.
        var family = TestFamilies.Build("near-real pair", ["x"], ["(x - 1)*((x - 2)^2 + 0.000001)"]);
        var solver = new FiberSolver(family.System);

        var fiber = solver.SolveTotalDegree([]);

        Assert.Equal(3, fiber.RootCount);
        Assert.Equal(1, fiber.RealCount);
        Assert.True(fiber.RealCountCertified);
        foreach (var solution in fiber.Solutions)
        {
            var expected = Math.Abs(solution.Values[0].Imaginary) > 5e-4 ? Reality.NonReal : Reality.Real;
            Assert.Equal(expected, solution.Certificate.Reality);
        }
    }

    [Fact]
    public void Real_and_non_real_solutions_of_a_real_fiber_are_told_apart_by_their_imaginary_parts()
    {
        var family = TestFamilies.Example("microgrid4");

        // 14 isolated solutions at most: the generic root count of the equal-line four-bus network (an independent
        // Gröbner-basis computation, REFERENCES.md); with it the 50 paths at infinity cannot hide a finite solution.
        var fiber = new FiberSolver(family.System).SolveTotalDegree([0.4, -0.25, 0.6], rootCountBound: 14);

        Assert.True(fiber.RealCountCertified);
        Assert.InRange(fiber.RealCount, 1, 13);
        foreach (var solution in fiber.Solutions)
        {
            var imaginary = SolutionSets.MaxImaginary(solution.Values);
            Assert.Equal(imaginary < 1e-10 ? Reality.Real : Reality.NonReal, solution.Certificate.Reality);
            Assert.True(imaginary < 1e-12 || imaginary > 1e-6, $"|Im| = {imaginary}: neither clearly real nor clearly not");
        }
    }

    [Fact]
    public void A_complex_parameter_point_has_no_reality_verdicts_and_no_certified_real_count()
    {
        var family = TestFamilies.Example("microgrid4");
        var solver = new FiberSolver(family.System);

        var fiber = solver.SolveTotalDegree([new Complex(0.4, 0.1), -0.25, 0.6]);

        Assert.Equal(14, fiber.RootCount);
        Assert.All(fiber.Solutions, s => Assert.Equal(Reality.NotApplicable, s.Certificate.Reality));
        Assert.All(fiber.Solutions, s => Assert.True(s.Certificate.ApproximateZero && s.Certified));
        Assert.False(fiber.RealCountCertified);
    }

    [Fact]
    public void The_same_point_twice_is_not_certified_distinct()
    {
        var family = TestFamilies.Example("two-bus");
        var solver = new FiberSolver(family.System);
        var s = 1.0 / 1.7;
        Complex[] point = [Math.Sqrt(1 - (s * s)), s];

        var certified = solver.Certify([1.0], [(0, point), (1, (Complex[])point.Clone())]);

        Assert.All(certified, p => Assert.True(p.Certificate.ApproximateZero && !p.Distinct && !p.Certified));
    }
}
