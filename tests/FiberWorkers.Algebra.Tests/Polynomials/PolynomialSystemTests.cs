using System.Numerics;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Testing;

namespace FiberWorkers.Algebra.Tests.Polynomials;

public sealed class PolynomialSystemTests
{
    [Theory]
    [InlineData(2, 4)]
    [InlineData(4, 16)]
    [InlineData(7, 128)]
    public void Katsura_n_has_Bezout_number_two_to_the_n(int n, int bezout)
    {
        // Katsura (1990): one linear and n quadratic equations, Bézout number 2ⁿ.
        var system = TestFamilies.Katsura(n).System;
        Assert.Equal(n + 1, system.UnknownCount);
        Assert.Equal(1, system.Degrees[0]);
        Assert.All(system.Degrees.Skip(1), d => Assert.Equal(2, d));
        Assert.Equal(new BigInteger(bezout), system.BezoutNumber);
    }

    [Theory]
    [InlineData(5, 120)]
    [InlineData(7, 5040)]
    public void Cyclic_n_has_degrees_one_to_n_and_Bezout_number_n_factorial(int n, int bezout)
    {
        var system = TestFamilies.Cyclic(n).System;
        Assert.Equal(Enumerable.Range(1, n), system.Degrees);
        Assert.Equal(new BigInteger(bezout), system.BezoutNumber);
    }

    [Fact]
    public void Bundled_examples_have_the_degrees_of_their_equations()
    {
        Assert.Equal([2, 2, 2, 2, 2, 2], TestFamilies.Example("microgrid4").System.Degrees);
        Assert.Equal(new BigInteger(64), TestFamilies.Example("microgrid4").System.BezoutNumber);
        Assert.Equal(new BigInteger(256), TestFamilies.Example("microgrid5").System.BezoutNumber);
        Assert.Equal([1, 1, 2, 2], TestFamilies.Example("two-link-arm").System.Degrees);
        Assert.Equal([3], TestFamilies.Example("reaction-switch").System.Degrees);
        Assert.Equal([2, 1], TestFamilies.Example("two-bus").System.Degrees);
    }

    [Fact]
    public void Degrees_count_only_the_unknowns_not_the_parameters()
    {
        var family = TestFamilies.Build("mixed", ["x"], ["a^3*x - a"], [("a", -1, 1)]);
        Assert.Equal([1], family.System.Degrees);
    }

    [Fact]
    public void Huge_Bezout_numbers_are_exact()
    {
        var unknowns = Enumerable.Range(0, 30).Select(i => $"x{i}").ToArray();
        var equations = unknowns.Select(u => $"{u}^30 - 1").ToArray();
        var system = TestFamilies.Build("big", unknowns, equations).System;
        Assert.Equal(BigInteger.Pow(30, 30), system.BezoutNumber);
    }

    [Fact]
    public void Derivative_substitution_and_remap_follow_the_rules_of_calculus()
    {
        // p(x, y) = 3x²y − y³ + 2
        var x = Polynomial.Variable(2, 0);
        var y = Polynomial.Variable(2, 1);
        var p = x.Multiply(x).Multiply(y).Scale(3).Subtract(y.Power(3)).Add(Polynomial.Constant(2, 2));
        var dx = p.Derivative(0);
        Assert.True(dx.SameAs(x.Multiply(y).Scale(6)));
        // Substitute x = s + 1, y = 2s (one new variable s): p = 3(s+1)²·2s − 8s³ + 2 = −2s³ + 12s² + 6s + 2.
        var s = Polynomial.Variable(1, 0);
        var composed = p.Substitute([s.Add(Polynomial.Constant(1, 1)), s.Scale(2)]);
        var expected = Polynomial.FromTerms(1, [([3], -2.0), ([2], 12.0), ([1], 6.0), ([0], 2.0)]);
        Assert.True(composed.SameAs(expected));
        // Remap swaps the variables.
        var swapped = p.Remap(2, [1, 0]);
        Assert.Equal(p.Evaluate([new Complex(2, 1), new Complex(-1, 3)]), swapped.Evaluate([new Complex(-1, 3), new Complex(2, 1)]));
    }

    [Fact]
    public void Cancelling_terms_leave_no_zero_coefficients()
    {
        var x = Polynomial.Variable(1, 0);
        var zero = x.Add(Polynomial.Constant(1, 1)).Multiply(x.Subtract(Polynomial.Constant(1, 1))).Subtract(x.Power(2)).Add(Polynomial.Constant(1, 1));
        Assert.True(zero.IsZero);
    }
}
