using System.Numerics;
using FiberWorkers.Algebra.LinearAlgebra;
using FiberWorkers.Algebra.Polynomials;

namespace FiberWorkers.Solving.Monodromy;

/// <summary>
/// Places a random point x₀ in a fiber of the family itself, so that monodromy needs no auxiliary constants (and
/// no final homotopy to q = 0). The equations in which no parameter appears are met by moving x₀ onto their
/// solution set (Newton's method with minimum-norm steps); the others, affine-linear in the parameters, are then
/// met by solving for as many parameters as there are such equations, the rest keeping their values.
/// </summary>
/// <remarks>
/// Monodromy only reaches the solutions over the irreducible component of the incidence variety
/// {(x, p) : F(x; p) = 0} that holds (x₀, p₀). When the parameter-free equations cut out a set V, that variety is
/// a bundle of linear spaces over V, irreducible exactly when V is; a reducible V (say xy = 0) would hide whole
/// components from the loops, and the trace test would pass on the part found. So placement is used only where V is
/// irreducible for a reason seen in the equations: they fall into groups with no unknown in common, and each group
/// is either affine-linear (a linear space) or a single quadric whose homogenized matrix has rank at least 3
/// (an irreducible quadric; rank 2 is a pair of hyperplanes). The unit-voltage circles cᵢ² + sᵢ² = 1 of power-flow
/// families are of the second kind. Anything else keeps the auxiliary constants.
/// </remarks>
internal static class FiberPlacement
{
    /// <summary>
    /// Moves <paramref name="x0"/> onto the parameter-free equations' solution set and solves the others for the
    /// first parameters of <paramref name="parameters"/>; false (both left in an unspecified state) when the family
    /// does not have that shape or a step is ill-conditioned.
    /// </summary>
    public static bool TryPlace(PolynomialSystem system, Complex[] x0, Complex[] parameters)
    {
        var n = system.UnknownCount;
        var m = system.ParameterCount;
        var free = new List<int>();
        var linear = new List<int>();
        for (var i = 0; i < system.Equations.Count; i++)
        {
            switch (system.Equations[i].Degree(n, m))
            {
                case 0:
                    free.Add(i);
                    break;
                case 1:
                    linear.Add(i);
                    break;
                default:
                    return false;
            }
        }

        if (linear.Count == 0 || linear.Count > m || free.Count >= n)
        {
            return false;
        }

        return (free.Count == 0 || (Irreducible(system, free) && OntoFreeEquations(system, free, x0)))
            && SolveParameters(system, linear, x0, parameters);
    }

    /// <summary>Groups by shared unknowns, each affine-linear or a single quadric of rank ≥ 3 (see the remarks).</summary>
    internal static bool Irreducible(PolynomialSystem system, IReadOnlyList<int> equations)
    {
        var n = system.UnknownCount;
        var unknownsOf = equations.Select(i => UnknownsOf(system.Equations[i], n)).ToList();
        var group = Enumerable.Range(0, equations.Count).ToArray();
        int Root(int k) => group[k] == k ? k : group[k] = Root(group[k]);
        for (var a = 0; a < equations.Count; a++)
        {
            for (var b = a + 1; b < equations.Count; b++)
            {
                if (unknownsOf[a].Overlaps(unknownsOf[b]))
                {
                    group[Root(a)] = Root(b);
                }
            }
        }

        foreach (var members in Enumerable.Range(0, equations.Count).GroupBy(Root))
        {
            var polynomials = members.Select(k => system.Equations[equations[k]]).ToList();
            if (polynomials.All(p => p.Degree(0, n) == 1))
            {
                continue;
            }

            if (polynomials.Count != 1 || polynomials[0].Degree(0, n) != 2
                || QuadricRank(polynomials[0], [.. unknownsOf[members.First()].Order()]) < 3)
            {
                return false;
            }
        }

        return true;
    }

    private static HashSet<int> UnknownsOf(Polynomial polynomial, int unknowns)
    {
        var used = new HashSet<int>();
        for (var term = 0; term < polynomial.TermCount; term++)
        {
            var exponents = polynomial.ExponentsOf(term);
            for (var j = 0; j < unknowns; j++)
            {
                if (exponents[j] > 0)
                {
                    used.Add(j);
                }
            }
        }

        return used;
    }

    /// <summary>Numerical rank of the symmetric matrix of the homogenized quadric in <paramref name="variables"/>.</summary>
    internal static int QuadricRank(Polynomial quadric, IReadOnlyList<int> variables)
    {
        var v = variables.Count;
        var size = v + 1;
        var matrix = new double[size, size];
        for (var term = 0; term < quadric.TermCount; term++)
        {
            var exponents = quadric.ExponentsOf(term);
            var at = new List<int>();
            foreach (var (variable, k) in variables.Select((variable, k) => (variable, k)))
            {
                for (var e = 0; e < exponents[variable]; e++)
                {
                    at.Add(k);
                }
            }

            var c = quadric.CoefficientOf(term);
            switch (at.Count)
            {
                case 2 when at[0] == at[1]:
                    matrix[at[0], at[0]] += c;
                    break;
                case 2:
                    matrix[at[0], at[1]] += c / 2;
                    matrix[at[1], at[0]] += c / 2;
                    break;
                case 1:
                    matrix[at[0], v] += c / 2;
                    matrix[v, at[0]] += c / 2;
                    break;
                default:
                    matrix[v, v] += c;
                    break;
            }
        }

        // Gaussian elimination with full pivoting; entries below 1e-12 of the largest count as zero.
        var largest = 0.0;
        foreach (var entry in matrix)
        {
            largest = Math.Max(largest, Math.Abs(entry));
        }

        var rank = 0;
        var rows = Enumerable.Range(0, size).ToList();
        var columns = Enumerable.Range(0, size).ToList();
        while (rows.Count > 0)
        {
            var (pivotRow, pivotColumn, pivot) = (-1, -1, 0.0);
            foreach (var r in rows)
            {
                foreach (var c in columns)
                {
                    if (Math.Abs(matrix[r, c]) > Math.Abs(pivot))
                    {
                        (pivotRow, pivotColumn, pivot) = (r, c, matrix[r, c]);
                    }
                }
            }

            if (Math.Abs(pivot) <= 1e-12 * largest)
            {
                break;
            }

            rank++;
            rows.Remove(pivotRow);
            columns.Remove(pivotColumn);
            foreach (var r in rows)
            {
                var factor = matrix[r, pivotColumn] / pivot;
                foreach (var c in columns)
                {
                    matrix[r, c] -= factor * matrix[pivotRow, c];
                }
            }
        }

        return rank;
    }

    /// <summary>Most Newton steps onto the parameter-free equations' solution set.</summary>
    private const int MaxNewtonSteps = 40;

    /// <summary>
    /// Newton's method with minimum-norm steps Δ = −Jᴴ(JJᴴ)⁻¹G on the k &lt; n parameter-free equations G: from a
    /// generic start it converges quadratically to a nearby (generic) point of their solution set.
    /// </summary>
    private static bool OntoFreeEquations(PolynomialSystem system, IReadOnlyList<int> equations, Complex[] x)
    {
        var n = system.UnknownCount;
        var k = equations.Count;
        var polynomials = equations.Select(i => system.Equations[i]).ToArray();
        var gradients = polynomials.Select(p => Enumerable.Range(0, n).Select(p.Derivative).ToArray()).ToArray();
        var point = new Complex[n + system.ParameterCount];
        var values = new Complex[k];
        var jacobian = new Complex[k * n];
        var normal = new Complex[k * k];
        var pivots = new int[k];
        for (var step = 0; step < MaxNewtonSteps; step++)
        {
            x.CopyTo(point, 0);
            var scale = 1.0;
            for (var j = 0; j < n; j++)
            {
                scale = Math.Max(scale, x[j].Magnitude);
            }

            var residual = 0.0;
            for (var r = 0; r < k; r++)
            {
                values[r] = polynomials[r].Evaluate(point);
                residual = Math.Max(residual, values[r].Magnitude);
                for (var j = 0; j < n; j++)
                {
                    jacobian[(r * n) + j] = gradients[r][j].Evaluate(point);
                }
            }

            if (!double.IsFinite(residual))
            {
                return false;
            }

            if (residual <= 1e-14 * scale * scale)
            {
                return true;
            }

            // J Jᴴ y = G, then x ← x − Jᴴ y.
            for (var a = 0; a < k; a++)
            {
                for (var b = 0; b < k; b++)
                {
                    var sum = Complex.Zero;
                    for (var j = 0; j < n; j++)
                    {
                        sum += jacobian[(a * n) + j] * Complex.Conjugate(jacobian[(b * n) + j]);
                    }

                    normal[(a * k) + b] = sum;
                }
            }

            if (!SolveWellConditioned(normal, k, pivots, values, 1e12))
            {
                return false;
            }

            for (var j = 0; j < n; j++)
            {
                var delta = Complex.Zero;
                for (var r = 0; r < k; r++)
                {
                    delta += Complex.Conjugate(jacobian[(r * n) + j]) * values[r];
                }

                x[j] -= delta;
            }
        }

        return false;
    }

    /// <summary>
    /// Solves the equations affine-linear in p for the first of the parameters (the others keep their values):
    /// F_L(x₀; p) = F_L(x₀; p_fixed) + A·p_free, A = ∂F_L/∂p_free, exact because F_L is affine in p.
    /// </summary>
    private static bool SolveParameters(PolynomialSystem system, IReadOnlyList<int> equations, Complex[] x0, Complex[] parameters)
    {
        var n = system.UnknownCount;
        var m = system.ParameterCount;
        var l = equations.Count;
        var point = new Complex[n + m];
        x0.CopyTo(point, 0);
        for (var k = l; k < m; k++)
        {
            point[n + k] = parameters[k];
        }

        var matrix = new Complex[l * l];
        var values = new Complex[l];
        for (var r = 0; r < l; r++)
        {
            var equation = system.Equations[equations[r]];
            values[r] = -equation.Evaluate(point);
            for (var k = 0; k < l; k++)
            {
                matrix[(r * l) + k] = equation.Derivative(n + k).Evaluate(point);
            }
        }

        if (!SolveWellConditioned(matrix, l, new int[l], values, 1e10))
        {
            return false;
        }

        for (var k = 0; k < l; k++)
        {
            parameters[k] = values[k];
        }

        return true;
    }

    /// <summary>
    /// Solves matrix·y = values in place (the matrix is overwritten by its factors); false when the factorization
    /// fails or the estimated 1-norm condition number exceeds <paramref name="limit"/>.
    /// </summary>
    private static bool SolveWellConditioned(Complex[] matrix, int n, int[] pivots, Complex[] values, double limit)
    {
        var norm = ComplexLu.OneNorm(matrix, n);
        if (!ComplexLu.Factor(matrix, n, pivots)
            || norm * ComplexLu.EstimateInverseOneNorm(matrix, n, pivots, new Complex[2 * n]) > limit)
        {
            return false;
        }

        ComplexLu.Solve(matrix, n, pivots, values);
        return true;
    }
}
