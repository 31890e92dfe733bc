using System.Numerics;
using FiberWorkers.Algebra.Newton;
using FiberWorkers.Testing;

namespace FiberWorkers.Algebra.Tests.Newton;

public sealed class NewtonSolverTests
{
    [Fact]
    public void Newton_converges_quadratically_to_a_known_root()
    {
        // x² + y² = 5, x·y = 2 has the root (1, 2); the Jacobian there is regular.
        var family = TestFamilies.Build("known root", ["x", "y"], ["x^2 + y^2 - 5", "x*y - 2"]);
        var compiled = family.System.Compile();
        var workspace = new NewtonWorkspace(compiled);
        var errors = new List<double>();
        for (var iterations = 1; iterations <= 6; iterations++)
        {
            Complex[] x = [new(1.15, 0.05), new(1.9, -0.04)];
            NewtonSolver.Solve(compiled, [], x, new NewtonOptions { MaxIterations = iterations, StepTolerance = 0 }, workspace);
            errors.Add(Math.Max(Complex.Abs(x[0] - 1), Complex.Abs(x[1] - 2)));
        }

        // Quadratic convergence: e_{k+1} ≤ C·e_k² with a modest C, until rounding level.
        for (var k = 0; k + 1 < errors.Count && errors[k] > 1e-7; k++)
        {
            Assert.True(errors[k + 1] <= 5 * errors[k] * errors[k], $"step {k + 1}: {errors[k]} -> {errors[k + 1]}");
        }

        Assert.True(errors[^1] < 1e-15);
    }

    [Fact]
    public void Result_reports_residual_and_condition_at_the_root()
    {
        var family = TestFamilies.Build("known root", ["x", "y"], ["x^2 + y^2 - 5", "x*y - 2"]);
        var compiled = family.System.Compile();
        Complex[] x = [1.1, 1.8];
        var result = NewtonSolver.Solve(compiled, [], x, NewtonOptions.Default, new NewtonWorkspace(compiled));
        Assert.True(result.Converged);
        Assert.True(result.ResidualNorm < 1e-14);
        // J = [[2x, 2y], [y, x]] at (1, 2) = [[2, 4], [2, 1]], J⁻¹ = [[−1, 4], [2, −2]]/6:
        // κ₁ = ‖J‖₁‖J⁻¹‖₁ = 5 · 1 = 5 (Hager's estimate is exact for 2×2 here).
        Assert.Equal(5.0, result.ConditionEstimate, 9);
    }

    [Fact]
    public void Newton_reports_an_infinite_condition_at_a_singular_root()
    {
        // x + y = 2, x·y = 1 has the double root (1, 1), where J = [[1, 1], [y, x]] is singular; Newton converges
        // only linearly and the condition estimate grows like 1 / distance.
        var family = TestFamilies.Build("double root", ["x", "y"], ["x + y - 2", "x*y - 1"]);
        var compiled = family.System.Compile();
        Complex[] x = [1.3, 0.6];
        var result = NewtonSolver.Solve(compiled, [], x, new NewtonOptions { MaxIterations = 40 }, new NewtonWorkspace(compiled));
        Assert.True(Complex.Abs(x[0] - 1) < 1e-6, $"x = {x[0]}");
        Assert.True(result.ConditionEstimate > 1e6, $"condition {result.ConditionEstimate}");
    }

    [Fact]
    public void Newton_uses_the_parameter_values()
    {
        var family = TestFamilies.Build("shifted", ["x"], ["x^2 - a"], [("a", 0, 10)]);
        var compiled = family.System.Compile();
        Complex[] x = [2.5];
        var result = NewtonSolver.Solve(compiled, [new Complex(9, 0)], x, NewtonOptions.Default, new NewtonWorkspace(compiled));
        Assert.True(result.Converged);
        Assert.Equal(3.0, x[0].Real, 14);
    }
}
