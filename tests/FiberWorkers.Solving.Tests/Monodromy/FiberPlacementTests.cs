using System.Numerics;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Monodromy;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Testing;

namespace FiberWorkers.Solving.Tests.Monodromy;

/// <summary>Placing monodromy's first solution in a fiber of the family itself, and where that is refused.</summary>
public sealed class FiberPlacementTests
{
    [Fact]
    public void The_five_bus_microgrid_is_placed_on_its_circles_with_powers_solved_for()
    {
        var family = TestFamilies.Example("microgrid5");
        var (x0, parameters) = Draw(family, 9_101);
        var before = (Complex[])parameters.Clone();

        Assert.True(FiberPlacement.TryPlace(family.System, x0, parameters));

        // Every equation holds at (x₀, p₀): the four circles by Newton's method, the four power balances by the
        // solved injections.
        var point = x0.Concat(parameters).ToArray();
        foreach (var equation in family.System.Equations)
        {
            Assert.True(equation.Evaluate(point).Magnitude < 1e-12, $"residual {equation.Evaluate(point).Magnitude:E2}");
        }

        for (var k = 0; k < parameters.Length; k++)
        {
            Assert.NotEqual(before[k], parameters[k]);
            Assert.True(Math.Abs(parameters[k].Imaginary) > 1e-6, "a generic complex point, not a real one");
        }
    }

    [Theory]
    [InlineData("x*y", "x + y - a")]
    [InlineData("x^3 + y - 1", "x - y - a")]
    public void Parameter_free_equations_of_unknown_irreducibility_are_refused(string free, string linear)
    {
        // x·y = 0 is two lines (its homogenized matrix has rank 2); a cubic is not recognised either way.
        var family = Family(["x", "y"], [free, linear], ["a"]);
        var (x0, parameters) = Draw(family, 9_102);

        Assert.False(FiberPlacement.TryPlace(family.System, x0, parameters));
    }

    [Fact]
    public void A_reducible_parameter_free_equation_keeps_the_constants_and_both_components_are_found()
    {
        // x·y = 0, x + y = a: the solutions (a, 0) and (0, a) lie on different lines of xy = 0, and no loop in a
        // alone joins them. With constants (xy = q₁) the family is irreducible again and monodromy finds both.
        var family = Family(["x", "y"], ["x*y", "x + y - a"], ["a"]);

        var result = StartFiberFactory.Create(
            family.System, family.ContentHash, family.Parameters, StartFiberMethod.Monodromy, new SolveOptions { Seed = 9_103 });

        Assert.True(result.Monodromy!.Augmented);
        Assert.Equal(2, result.Fiber.RootCount);
    }

    [Fact]
    public void Quadrics_sharing_an_unknown_are_refused_and_separate_ones_accepted()
    {
        var shared = Family(["x", "y", "z"], ["x^2 + y^2 - 1", "y^2 + z^2 - 2", "x + y + z - a"], ["a"]);
        var separate = Family(["x", "y", "z", "w"], ["x^2 + y^2 - 1", "z^2 + w^2 - 2", "x + z - a", "y - w - b"], ["a", "b"]);

        Assert.False(FiberPlacement.Irreducible(shared.System, [0, 1]));
        Assert.True(FiberPlacement.Irreducible(separate.System, [0, 1]));
    }

    [Fact]
    public void Affine_linear_parameter_free_equations_are_accepted_and_met()
    {
        var family = Family(["x", "y", "z"], ["x + y + z - 1", "x - y + 2*z", "x*y*z - a"], ["a"]);
        var (x0, parameters) = Draw(family, 9_104);

        Assert.True(FiberPlacement.TryPlace(family.System, x0, parameters));
        var point = x0.Concat(parameters).ToArray();
        Assert.All(family.System.Equations, e => Assert.True(e.Evaluate(point).Magnitude < 1e-12));
    }

    [Theory]
    [InlineData("c^2 + s^2 - 1", 3)]
    [InlineData("x*y", 2)]
    [InlineData("x^2 - 2*x + 1", 1)]
    [InlineData("x^2 + x*y - 3*y + 2", 3)]
    public void Quadric_rank_counts_the_homogenized_matrix(string quadric, int rank)
    {
        var family = Family(["x", "y", "c", "s"], [quadric, "x - a", "y - a", "c + s - a"], ["a"]);
        var used = Enumerable.Range(0, 4).Where(j => family.System.Equations[0].Degree(j, 1) > 0).ToList();

        Assert.Equal(rank, FiberPlacement.QuadricRank(family.System.Equations[0], used));
    }

    private static FamilyDefinition Family(string[] unknowns, string[] equations, string[] parameters) =>
        FamilyReader.Parse(
            TestFamilies.Json("placement test", unknowns, equations, [.. parameters.Select(p => (p, -1.0, 1.0))]),
            "placement.json");

    private static (Complex[] X0, Complex[] Parameters) Draw(FamilyDefinition family, int seed)
    {
        var random = new SeededRandom((ulong)seed);
        var x0 = Enumerable.Range(0, family.System.UnknownCount).Select(_ => random.NextComplexGaussian()).ToArray();
        var parameters = Enumerable.Range(0, family.System.ParameterCount).Select(_ => random.NextComplexGaussian()).ToArray();
        return (x0, parameters);
    }
}
