using System.Numerics;
using FiberWorkers.Algebra.Evaluation;
using MathNet.Numerics.LinearAlgebra;

namespace FiberWorkers.Atlas.Sampling;

/// <summary>
/// The normal of the discriminant locus at a simple fold (x*, p*): with w the left null vector of ∂F/∂x there
/// (wᵀ·∂F/∂x = 0), the locus's tangent space is {dp : wᵀ·∂F/∂p·dp = 0}, so wᵀ·∂F/∂p is its normal (Moore &amp;
/// Spence 1980). Returned in box-normalized coordinates (scaled by each axis's width) with unit length, or null
/// when the fold is not simple enough to define one.
/// </summary>
internal static class LocusNormal
{
    public static double[]? Compute(CompiledSystem system, ReadOnlySpan<double> solution, ReadOnlySpan<double> point, ReadOnlySpan<double> widths)
    {
        var n = system.UnknownCount;
        var m = system.ParameterCount;
        var x = new Complex[n];
        var p = new Complex[m];
        for (var i = 0; i < n; i++)
        {
            x[i] = solution[i];
        }

        for (var k = 0; k < m; k++)
        {
            p[k] = point[k];
        }

        var values = new Complex[n];
        var jacobian = new Complex[n * n];
        var parameterJacobian = new Complex[n * m];
        system.Evaluate(x, p, values, jacobian, parameterJacobian, system.CreateWorkspace());
        var matrix = Matrix<double>.Build.Dense(n, n, (i, j) => jacobian[(i * n) + j].Real);
        // ∂F/∂x = U·S·Vᵀ: the left singular vector of the smallest singular value (last column of U) is w. (The SVD
        // of the transpose would give V instead, the right null vector, which differs unless ∂F/∂x is symmetric.)
        var svd = matrix.Svd(computeVectors: true);

        // A simple fold has one vanishing singular value, well separated from the next.
        var singular = svd.S;
        if (n > 1 && !(singular[n - 1] < 1e-6 * singular[n - 2]))
        {
            return null;
        }

        var left = svd.U.Column(n - 1);
        var normal = new double[m];
        var length = 0.0;
        for (var k = 0; k < m; k++)
        {
            var component = 0.0;
            for (var i = 0; i < n; i++)
            {
                component += left[i] * parameterJacobian[(i * m) + k].Real;
            }

            normal[k] = component * widths[k];
            length += normal[k] * normal[k];
        }

        length = Math.Sqrt(length);
        if (!(length > 0) || !double.IsFinite(length))
        {
            return null;
        }

        for (var k = 0; k < m; k++)
        {
            normal[k] /= length;
        }

        return normal;
    }
}
