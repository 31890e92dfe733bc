using System.Numerics;

namespace FiberWorkers.Algebra.LinearAlgebra;

/// <summary>
/// Dense complex LU factorization with partial pivoting on row-major n×n spans, for the small systems of a
/// path tracker's step loop. Pivots are chosen by |re| + |im|, which avoids a square root per entry and picks
/// the same pivot as the modulus up to a factor √2.
/// </summary>
public static class ComplexLu
{
    /// <summary>
    /// Factors <paramref name="matrix"/> in place into L (unit lower, below the diagonal) and U; returns false
    /// when a pivot is exactly zero (the matrix is singular in floating point).
    /// </summary>
    public static bool Factor(Span<Complex> matrix, int n, Span<int> pivots)
    {
        CheckShape(matrix.Length, n, pivots.Length);
        var nonsingular = true;
        for (var k = 0; k < n; k++)
        {
            var pivotRow = k;
            var pivotSize = Size(matrix[(k * n) + k]);
            for (var i = k + 1; i < n; i++)
            {
                var size = Size(matrix[(i * n) + k]);
                if (size > pivotSize)
                {
                    pivotSize = size;
                    pivotRow = i;
                }
            }

            pivots[k] = pivotRow;
            if (pivotRow != k)
            {
                var rowK = matrix.Slice(k * n, n);
                var rowP = matrix.Slice(pivotRow * n, n);
                for (var j = 0; j < n; j++)
                {
                    (rowK[j], rowP[j]) = (rowP[j], rowK[j]);
                }
            }

            if (pivotSize == 0)
            {
                nonsingular = false;
                continue;
            }

            var inversePivot = Complex.One / matrix[(k * n) + k];
            var pivotRowSpan = matrix.Slice(k * n, n);
            for (var i = k + 1; i < n; i++)
            {
                var row = matrix.Slice(i * n, n);
                var factor = row[k] * inversePivot;
                row[k] = factor;
                if (factor == Complex.Zero)
                {
                    continue;
                }

                for (var j = k + 1; j < n; j++)
                {
                    row[j] -= factor * pivotRowSpan[j];
                }
            }
        }

        return nonsingular;
    }

    /// <summary>Solves A·x = b in place given the factors from <see cref="Factor"/>.</summary>
    public static void Solve(ReadOnlySpan<Complex> factors, int n, ReadOnlySpan<int> pivots, Span<Complex> rhs)
    {
        CheckShape(factors.Length, n, pivots.Length);
        if (rhs.Length != n)
        {
            throw new ArgumentException($"right-hand side has {rhs.Length} entries, expected {n}", nameof(rhs));
        }

        for (var k = 0; k < n; k++)
        {
            var p = pivots[k];
            if (p != k)
            {
                (rhs[k], rhs[p]) = (rhs[p], rhs[k]);
            }
        }

        for (var i = 1; i < n; i++)
        {
            var row = factors.Slice(i * n, i);
            var sum = rhs[i];
            for (var j = 0; j < i; j++)
            {
                sum -= row[j] * rhs[j];
            }

            rhs[i] = sum;
        }

        for (var i = n - 1; i >= 0; i--)
        {
            var row = factors.Slice(i * n, n);
            var sum = rhs[i];
            for (var j = i + 1; j < n; j++)
            {
                sum -= row[j] * rhs[j];
            }

            rhs[i] = sum / row[i];
        }
    }

    /// <summary>Solves Aᴴ·x = b in place given the factors of A (used by the condition estimator).</summary>
    public static void SolveConjugateTranspose(ReadOnlySpan<Complex> factors, int n, ReadOnlySpan<int> pivots, Span<Complex> rhs)
    {
        CheckShape(factors.Length, n, pivots.Length);
        // A = Pᵀ L U, so Aᴴ = Uᴴ Lᴴ P: solve Uᴴ y = b, then Lᴴ z = y, then x = Pᵀ z.
        for (var i = 0; i < n; i++)
        {
            var sum = rhs[i];
            for (var j = 0; j < i; j++)
            {
                sum -= Complex.Conjugate(factors[(j * n) + i]) * rhs[j];
            }

            rhs[i] = sum / Complex.Conjugate(factors[(i * n) + i]);
        }

        for (var i = n - 1; i >= 0; i--)
        {
            var sum = rhs[i];
            for (var j = i + 1; j < n; j++)
            {
                sum -= Complex.Conjugate(factors[(j * n) + i]) * rhs[j];
            }

            rhs[i] = sum;
        }

        for (var k = n - 1; k >= 0; k--)
        {
            var p = pivots[k];
            if (p != k)
            {
                (rhs[k], rhs[p]) = (rhs[p], rhs[k]);
            }
        }
    }

    /// <summary>The 1-norm (largest column sum of moduli) of a row-major n×n matrix.</summary>
    public static double OneNorm(ReadOnlySpan<Complex> matrix, int n)
    {
        var norm = 0.0;
        for (var j = 0; j < n; j++)
        {
            var sum = 0.0;
            for (var i = 0; i < n; i++)
            {
                sum += Complex.Abs(matrix[(i * n) + j]);
            }

            norm = Math.Max(norm, sum);
        }

        return norm;
    }

    /// <summary>
    /// Estimates ‖A⁻¹‖₁ from the LU factors with Hager's method in Higham's complex form (Higham 1988):
    /// a few solves with A and Aᴴ, a lower bound that is almost always within a small factor.
    /// <paramref name="work"/> needs 2n entries.
    /// </summary>
    public static double EstimateInverseOneNorm(ReadOnlySpan<Complex> factors, int n, ReadOnlySpan<int> pivots, Span<Complex> work)
    {
        CheckShape(factors.Length, n, pivots.Length);
        if (work.Length < 2 * n)
        {
            throw new ArgumentException($"work needs {2 * n} entries, has {work.Length}", nameof(work));
        }

        var x = work[..n];
        var z = work.Slice(n, n);
        x.Fill(new Complex(1.0 / n, 0));
        var estimate = 0.0;
        var previousColumn = -1;
        for (var iteration = 0; iteration < 5; iteration++)
        {
            Solve(factors, n, pivots, x);
            var norm = 0.0;
            for (var i = 0; i < n; i++)
            {
                norm += Complex.Abs(x[i]);
            }

            if (!double.IsFinite(norm))
            {
                return double.PositiveInfinity;
            }

            if (iteration > 0 && norm <= estimate)
            {
                break;
            }

            estimate = norm;
            for (var i = 0; i < n; i++)
            {
                var modulus = Complex.Abs(x[i]);
                z[i] = modulus == 0 ? Complex.One : x[i] / modulus;
            }

            SolveConjugateTranspose(factors, n, pivots, z);
            var column = 0;
            var largest = 0.0;
            for (var i = 0; i < n; i++)
            {
                var modulus = Complex.Abs(z[i]);
                if (modulus > largest)
                {
                    largest = modulus;
                    column = i;
                }
            }

            if (column == previousColumn)
            {
                break;
            }

            previousColumn = column;
            x.Clear();
            x[column] = Complex.One;
        }

        return estimate;
    }

    private static double Size(Complex value) => Math.Abs(value.Real) + Math.Abs(value.Imaginary);

    private static void CheckShape(int matrixLength, int n, int pivotLength)
    {
        ArgumentOutOfRangeException.ThrowIfNegative(n);
        if (matrixLength < n * n)
        {
            throw new ArgumentException($"matrix has {matrixLength} entries, expected {n * n}");
        }

        if (pivotLength < n)
        {
            throw new ArgumentException($"pivots has {pivotLength} entries, expected {n}");
        }
    }
}
