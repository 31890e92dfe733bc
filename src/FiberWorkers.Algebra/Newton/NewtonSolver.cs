using System.Numerics;
using FiberWorkers.Algebra.Evaluation;
using FiberWorkers.Algebra.LinearAlgebra;

namespace FiberWorkers.Algebra.Newton;

/// <summary>
/// Newton's method on F(·; p) = 0 for a square compiled system, with the residual and a 1-norm condition
/// estimate of the Jacobian at the end. Allocation-free with a reused <see cref="NewtonWorkspace"/>.
/// </summary>
public static class NewtonSolver
{
    /// <summary>Refines <paramref name="x"/> in place.</summary>
    public static NewtonResult Solve(
        CompiledSystem system, ReadOnlySpan<Complex> p, Span<Complex> x, NewtonOptions options, NewtonWorkspace workspace)
    {
        ArgumentNullException.ThrowIfNull(system);
        ArgumentNullException.ThrowIfNull(options);
        ArgumentNullException.ThrowIfNull(workspace);
        var n = system.UnknownCount;
        if (system.EquationCount != n)
        {
            throw new ArgumentException("Newton's method needs a square system", nameof(system));
        }

        var values = workspace.Values;
        var jacobian = workspace.Jacobian;
        var pivots = workspace.Pivots;
        var stepNorm = double.PositiveInfinity;
        var growing = 0;
        var previousResidual = double.PositiveInfinity;
        var iterations = 0;
        var converged = false;
        while (iterations < options.MaxIterations)
        {
            system.Evaluate(x, p, values, jacobian, workspace.Evaluation);
            var residual = MaxNorm(values);
            growing = residual > previousResidual ? growing + 1 : 0;
            previousResidual = residual;
            if (!double.IsFinite(residual) || growing >= options.MaxGrowingSteps)
            {
                break;
            }

            if (!ComplexLu.Factor(jacobian, n, pivots))
            {
                break;
            }

            ComplexLu.Solve(jacobian, n, pivots, values);
            stepNorm = MaxNorm(values);
            for (var i = 0; i < n; i++)
            {
                x[i] -= values[i];
            }

            iterations++;
            if (stepNorm <= options.StepTolerance * (1 + MaxNorm(x)))
            {
                converged = true;
                break;
            }
        }

        if (!options.EstimateCondition)
        {
            system.Evaluate(x, p, values, workspace.Evaluation);
            return new NewtonResult(converged, iterations, MaxNorm(values), stepNorm, double.NaN);
        }

        system.Evaluate(x, p, values, jacobian, workspace.Evaluation);
        var finalResidual = MaxNorm(values);
        var matrixNorm = ComplexLu.OneNorm(jacobian, n);
        var condition = ComplexLu.Factor(jacobian, n, pivots)
            ? matrixNorm * ComplexLu.EstimateInverseOneNorm(jacobian, n, pivots, workspace.Work)
            : double.PositiveInfinity;
        return new NewtonResult(converged, iterations, finalResidual, stepNorm, condition);
    }

    /// <summary>The max-norm of a complex vector, by modulus.</summary>
    public static double MaxNorm(ReadOnlySpan<Complex> v)
    {
        var norm = 0.0;
        foreach (var z in v)
        {
            var modulus = Complex.Abs(z);
            if (double.IsNaN(modulus))
            {
                return double.NaN;
            }

            norm = Math.Max(norm, modulus);
        }

        return norm;
    }
}

/// <summary>Scratch space for <see cref="NewtonSolver"/> on one compiled system; one per thread.</summary>
public sealed class NewtonWorkspace
{
    /// <summary>Creates scratch space sized for <paramref name="system"/>.</summary>
    public NewtonWorkspace(CompiledSystem system)
    {
        ArgumentNullException.ThrowIfNull(system);
        var n = system.UnknownCount;
        Evaluation = system.CreateWorkspace();
        Values = new Complex[system.EquationCount];
        Jacobian = new Complex[system.EquationCount * n];
        Pivots = new int[n];
        Work = new Complex[2 * n];
    }

    internal EvaluationWorkspace Evaluation { get; }

    internal Complex[] Values { get; }

    internal Complex[] Jacobian { get; }

    internal int[] Pivots { get; }

    internal Complex[] Work { get; }
}
