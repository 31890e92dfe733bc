using System.Numerics;
using CsCheck;
using FiberWorkers.Algebra.Evaluation;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Algebra.Parsing;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Testing;

namespace FiberWorkers.Algebra.Tests.Evaluation;

public sealed class CompiledSystemTests
{
    public static TheoryData<string> Examples => [.. TestFamilies.ExampleNames];

    [Theory]
    [MemberData(nameof(Examples))]
    public void Values_match_tree_walking_evaluation_of_the_equation_text(string example)
    {
        var family = TestFamilies.Example(example);
        var compiled = family.System.Compile();
        var workspace = compiled.CreateWorkspace();
        var random = new Random(11);
        var trees = family.EquationTexts.Select(t => ExpressionParser.Parse(t, 100_000, 1000, 64)).ToArray();
        var n = family.Unknowns.Count;
        var values = new Complex[n];
        for (var trial = 0; trial < 50; trial++)
        {
            var x = RandomComplex(random, n);
            var p = RandomComplex(random, family.Parameters.Count);
            compiled.Evaluate(x, p, values, workspace);
            Complex ValueOf(string name)
            {
                var i = family.Unknowns.ToList().IndexOf(name);
                if (i >= 0)
                {
                    return x[i];
                }

                var k = family.Parameters.Select(q => q.Name).ToList().IndexOf(name);
                return k >= 0 ? p[k] : family.Constants[name];
            }

            for (var e = 0; e < n; e++)
            {
                var expected = trees[e].Evaluate(ValueOf);
                AssertClose(expected, values[e], 1e-12, $"{example} equation {e + 1}");
            }
        }
    }

    [Theory]
    [MemberData(nameof(Examples))]
    public void Jacobians_match_central_finite_differences(string example)
    {
        var system = TestFamilies.Example(example).System;
        AssertDerivativesMatchFiniteDifferences(system, new Random(example.Length * 7919), trials: 30);
    }

    [Fact]
    public void Random_polynomial_systems_evaluate_like_their_polynomials_and_differentiate_correctly()
    {
        Gen.Int[1, 4].SelectMany(n => Gen.Int[0, 3].Select(m => (n, m)))
            .SelectMany(shape => Gen.Int[0, int.MaxValue].Select(seed => (shape.n, shape.m, seed)))
            .Sample(
                sample =>
                {
                    var random = new Random(sample.seed);
                    var system = RandomSystem(random, sample.n, sample.m);
                    var compiled = system.Compile();
                    var workspace = compiled.CreateWorkspace();
                    var values = new Complex[sample.n];
                    var x = RandomComplex(random, sample.n);
                    var p = RandomComplex(random, sample.m);
                    compiled.Evaluate(x, p, values, workspace);
                    var variables = x.Concat(p).ToArray();
                    for (var i = 0; i < sample.n; i++)
                    {
                        AssertClose(system.Equations[i].Evaluate(variables), values[i], 1e-11, $"equation {i}");
                    }

                    AssertDerivativesMatchFiniteDifferences(system, random, trials: 3);
                },
                iter: 200,
                seed: "0N0XIzNsQ0O2");
    }

    [Fact]
    public void Directional_parameter_derivative_equals_the_parameter_jacobian_times_the_direction()
    {
        var system = TestFamilies.Example("microgrid4").System;
        var compiled = system.Compile();
        var workspace = compiled.CreateWorkspace();
        var random = new Random(5);
        var (n, m) = (system.UnknownCount, system.ParameterCount);
        var x = RandomComplex(random, n);
        var p = RandomComplex(random, m);
        var direction = RandomComplex(random, m);
        var (f, jx, jp) = (new Complex[n], new Complex[n * n], new Complex[n * m]);
        compiled.Evaluate(x, p, f, jx, jp, workspace);
        var (f2, jx2, along) = (new Complex[n], new Complex[n * n], new Complex[n]);
        compiled.EvaluateAlong(x, p, direction, f2, jx2, along, workspace);
        for (var i = 0; i < n; i++)
        {
            var expected = Complex.Zero;
            for (var k = 0; k < m; k++)
            {
                expected += jp[(i * m) + k] * direction[k];
            }

            AssertClose(expected, along[i], 1e-13, $"row {i}");
            Assert.Equal(f[i], f2[i]);
        }

        Assert.Equal(jx, jx2);
    }

    [Fact]
    public void Homogenized_system_agrees_on_the_chart_h_equals_one_and_scales_by_the_degree()
    {
        var family = TestFamilies.Example("two-link-arm");
        var homogeneous = family.System.Homogenize();
        Assert.Equal("h", homogeneous.Unknowns[0]);
        Assert.Equal(family.System.Degrees, homogeneous.Degrees);
        var (plain, projective) = (family.System.Compile(), homogeneous.Compile());
        var random = new Random(3);
        var n = family.System.UnknownCount;
        var x = RandomComplex(random, n);
        var p = RandomComplex(random, family.Parameters.Count);
        var (f, fh) = (new Complex[n], new Complex[n]);
        plain.Evaluate(x, p, f, plain.CreateWorkspace());
        projective.Evaluate([Complex.One, .. x], p, fh, projective.CreateWorkspace());
        for (var i = 0; i < n; i++)
        {
            AssertClose(f[i], fh[i], 1e-14, $"chart h=1, equation {i}");
        }

        // F^h(λX) = λ^d F^h(X) for every equation of degree d.
        var lambda = new Complex(0.7, -1.3);
        var X = RandomComplex(random, n + 1);
        var (a, b) = (new Complex[n], new Complex[n]);
        var ws = projective.CreateWorkspace();
        projective.Evaluate(X, p, a, ws);
        projective.Evaluate(X.Select(v => v * lambda).ToArray(), p, b, ws);
        for (var i = 0; i < n; i++)
        {
            AssertClose(Complex.Pow(lambda, homogeneous.Degrees[i]) * a[i], b[i], 1e-13, $"scaling, equation {i}");
        }
    }

    [Fact]
    public void Evaluation_allocates_nothing_per_call()
    {
        var compiled = TestFamilies.Example("microgrid4").System.Compile();
        var workspace = compiled.CreateWorkspace();
        var x = RandomComplex(new Random(1), 6);
        var p = RandomComplex(new Random(2), 3);
        var (f, jx, jp) = (new Complex[6], new Complex[36], new Complex[18]);
        compiled.Evaluate(x, p, f, jx, jp, workspace);
        var bytes = Allocations.FewestBytes(() =>
        {
            for (var i = 0; i < 1000; i++)
            {
                compiled.Evaluate(x, p, f, jx, jp, workspace);
                compiled.Evaluate(x, p, f, jx, workspace);
                compiled.Evaluate(x, p, f, workspace);
            }
        });

        Assert.Equal(0, bytes);
    }

    [Fact]
    public void Monomials_are_shared_across_equations_and_derivatives()
    {
        // x*y appears in both equations and x*y*z's derivatives reuse it: the program needs few products.
        var family = TestFamilies.Build(
            "shared", ["x", "y", "z"], ["x*y*z + x*y - 1", "x*y + z^2 - 2", "x + y + z"]);
        var compiled = family.System.Compile();
        // Monomials needed: xy, xyz, z², and the derivatives yz, xz (xy, x, y, z reused).
        Assert.Equal(5, compiled.ProductCount);
    }

    [Fact]
    public void A_workspace_from_another_system_is_refused()
    {
        var a = TestFamilies.Example("cubic").System.Compile();
        var b = TestFamilies.Example("cubic").System.Compile();
        var values = new Complex[1];
        Assert.Throws<ArgumentException>(() => a.Evaluate([Complex.One], [Complex.One, Complex.One], values, b.CreateWorkspace()));
    }

    internal static void AssertDerivativesMatchFiniteDifferences(PolynomialSystem system, Random random, int trials)
    {
        var compiled = system.Compile();
        var workspace = compiled.CreateWorkspace();
        var (n, m) = (system.UnknownCount, system.ParameterCount);
        var f = new Complex[n];
        var jx = new Complex[n * n];
        var jp = new Complex[n * m];
        var (plus, minus) = (new Complex[n], new Complex[n]);
        const double h = 1e-5;
        for (var trial = 0; trial < trials; trial++)
        {
            var x = RandomComplex(random, n);
            var p = RandomComplex(random, m);
            compiled.Evaluate(x, p, f, jx, jp, workspace);
            var scale = 1 + f.Max(Complex.Abs) + jx.Select(Complex.Abs).DefaultIfEmpty().Max();
            for (var j = 0; j < n + m; j++)
            {
                var (xp, pp) = ((Complex[])x.Clone(), (Complex[])p.Clone());
                var (xm, pm) = ((Complex[])x.Clone(), (Complex[])p.Clone());
                if (j < n)
                {
                    xp[j] += h;
                    xm[j] -= h;
                }
                else
                {
                    pp[j - n] += h;
                    pm[j - n] -= h;
                }

                compiled.Evaluate(xp, pp, plus, workspace);
                compiled.Evaluate(xm, pm, minus, workspace);
                for (var i = 0; i < n; i++)
                {
                    var difference = (plus[i] - minus[i]) / (2 * h);
                    var analytic = j < n ? jx[(i * n) + j] : jp[(i * m) + (j - n)];
                    // Central differences: error O(h²)·|F'''| plus rounding ε|F|/h, about 1e-9 relative here.
                    Assert.True(
                        Complex.Abs(difference - analytic) <= 1e-6 * scale,
                        $"d f{i} / d v{j}: analytic {analytic}, finite difference {difference}");
                }
            }
        }
    }

    internal static Complex[] RandomComplex(Random random, int count) =>
        [.. Enumerable.Range(0, count).Select(_ => new Complex((2 * random.NextDouble()) - 1, (2 * random.NextDouble()) - 1))];

    private static PolynomialSystem RandomSystem(Random random, int n, int m)
    {
        var equations = new Polynomial[n];
        for (var i = 0; i < n; i++)
        {
            var terms = new List<(int[], double)>();
            var termCount = random.Next(1, 8);
            for (var t = 0; t < termCount; t++)
            {
                var exponents = new int[n + m];
                for (var v = 0; v < n + m; v++)
                {
                    exponents[v] = random.Next(0, 4);
                }

                terms.Add((exponents, (2 * random.NextDouble()) - 1));
            }

            terms.Add((Enumerable.Range(0, n + m).Select(v => v == i ? 1 : 0).ToArray(), 1.0));
            equations[i] = Polynomial.FromTerms(n + m, terms);
        }

        return new PolynomialSystem(
            Enumerable.Range(0, n).Select(i => $"x{i}").ToArray(), Enumerable.Range(0, m).Select(k => $"p{k}").ToArray(), equations);
    }

    private static void AssertClose(Complex expected, Complex actual, double relative, string what)
    {
        Assert.False(double.IsNaN(actual.Real) || double.IsNaN(actual.Imaginary), $"{what}: NaN");
        var tolerance = relative * (1 + Complex.Abs(expected));
        Assert.True(Complex.Abs(expected - actual) <= tolerance, $"{what}: expected {expected}, got {actual}");
    }
}
