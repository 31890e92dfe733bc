using System.Numerics;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;

namespace FiberWorkers.Algebra.LinearAlgebra;

/// <summary>
/// Dense complex LU factorization with partial pivoting on row-major n×n spans, for the small systems of a
/// path tracker's step loop. Pivots are chosen by |re| + |im|, which avoids a square root per entry and picks
/// the same pivot as the modulus up to a factor √2. The factors keep the reciprocals of U's diagonal on the
/// diagonal, so solves multiply instead of dividing; use only this class's methods on them.
/// </summary>
public static class ComplexLu
{
    /// <summary>
    /// Factors <paramref name="matrix"/> in place into L (unit lower, below the diagonal) and U; returns false
    /// when a pivot is exactly zero (the matrix is singular in floating point).
    /// </summary>
    public static bool Factor(Span<Complex> matrix, int n, Span<int> pivots) =>
        Factor(matrix, n, pivots, Vector256.IsHardwareAccelerated);

    /// <summary>
    /// <see cref="Factor(Span{Complex}, int, Span{int})"/> with the row updates in 256-bit vectors (two complex
    /// entries at a time) or one entry at a time. Both give bit-identical factors: the vector update forms each
    /// product with the same roundings as <see cref="Complex"/>'s operators (no fused multiply–add), so results do not
    /// depend on the machine's vector width.
    /// </summary>
    internal static bool Factor(Span<Complex> matrix, int n, Span<int> pivots, bool vectorized)
    {
        CheckShape(matrix.Length, n, pivots.Length);
        ref var a = ref MemoryMarshal.GetReference(matrix);
        var nonsingular = true;
        for (var k = 0; k < n; k++)
        {
            var pivotRow = k;
            var pivotSize = Size(Unsafe.Add(ref a, (k * n) + k));
            for (var i = k + 1; i < n; i++)
            {
                var size = Size(Unsafe.Add(ref a, (i * n) + k));
                if (size > pivotSize)
                {
                    pivotSize = size;
                    pivotRow = i;
                }
            }

            pivots[k] = pivotRow;
            if (pivotRow != k)
            {
                ref var rowK = ref Unsafe.Add(ref a, k * n);
                ref var rowP = ref Unsafe.Add(ref a, pivotRow * n);
                for (var j = 0; j < n; j++)
                {
                    (Unsafe.Add(ref rowK, j), Unsafe.Add(ref rowP, j)) = (Unsafe.Add(ref rowP, j), Unsafe.Add(ref rowK, j));
                }
            }

            ref var pivotRowRef = ref Unsafe.Add(ref a, k * n);
            if (pivotSize == 0 || !double.IsFinite(pivotSize))
            {
                nonsingular = false;
                Unsafe.Add(ref pivotRowRef, k) = Complex.Zero;
                continue;
            }

            var inversePivot = Complex.One / Unsafe.Add(ref pivotRowRef, k);
            Unsafe.Add(ref pivotRowRef, k) = inversePivot;
            for (var i = k + 1; i < n; i++)
            {
                ref var row = ref Unsafe.Add(ref a, i * n);
                var factor = Unsafe.Add(ref row, k) * inversePivot;
                Unsafe.Add(ref row, k) = factor;
                if (factor == Complex.Zero)
                {
                    continue;
                }

                var j = k + 1;
                if (vectorized)
                {
                    j = UpdateRowVectorized(ref row, ref pivotRowRef, factor, j, n);
                }

                for (; j < n; j++)
                {
                    Unsafe.Add(ref row, j) -= factor * Unsafe.Add(ref pivotRowRef, j);
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

        ref var a = ref MemoryMarshal.GetReference(factors);
        ref var b = ref MemoryMarshal.GetReference(rhs);
        for (var k = 0; k < n; k++)
        {
            var p = pivots[k];
            if (p != k)
            {
                (Unsafe.Add(ref b, k), Unsafe.Add(ref b, p)) = (Unsafe.Add(ref b, p), Unsafe.Add(ref b, k));
            }
        }

        for (var i = 1; i < n; i++)
        {
            ref var row = ref Unsafe.Add(ref a, i * n);
            var sum = Unsafe.Add(ref b, i);
            for (var j = 0; j < i; j++)
            {
                sum -= Unsafe.Add(ref row, j) * Unsafe.Add(ref b, j);
            }

            Unsafe.Add(ref b, i) = sum;
        }

        for (var i = n - 1; i >= 0; i--)
        {
            ref var row = ref Unsafe.Add(ref a, i * n);
            var sum = Unsafe.Add(ref b, i);
            for (var j = i + 1; j < n; j++)
            {
                sum -= Unsafe.Add(ref row, j) * Unsafe.Add(ref b, j);
            }

            // The diagonal holds 1 / u_ii (see the class summary).
            Unsafe.Add(ref b, i) = sum * Unsafe.Add(ref row, i);
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

            rhs[i] = sum * Complex.Conjugate(factors[(i * n) + i]);
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
                sum += Modulus(matrix[(i * n) + j]);
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
                norm += Modulus(x[i]);
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
                var modulus = Modulus(x[i]);
                z[i] = modulus == 0 ? Complex.One : x[i] / modulus;
            }

            SolveConjugateTranspose(factors, n, pivots, z);
            var column = 0;
            var largest = 0.0;
            for (var i = 0; i < n; i++)
            {
                var modulus = Modulus(z[i]);
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

    /// <summary>
    /// row[j] −= factor · pivotRow[j] for j from <paramref name="start"/> in pairs; returns the first j not done.
    /// With p = (re, im) and p̃ = (−im, re), factor · p = f_re·p + f_im·p̃ lane by lane: (f_re·re − f_im·im,
    /// f_re·im + f_im·re), the same two products and one sum per lane as <see cref="Complex"/>'s multiplication.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static int UpdateRowVectorized(ref Complex row, ref Complex pivotRow, Complex factor, int start, int n)
    {
        var j = start;
        ref var rowValues = ref Unsafe.As<Complex, double>(ref row);
        ref var pivotValues = ref Unsafe.As<Complex, double>(ref pivotRow);
        var real = Vector256.Create(factor.Real);
        var imaginary = Vector256.Create(factor.Imaginary);
        var sign = Vector256.Create(-1.0, 1.0, -1.0, 1.0);
        for (; j + 2 <= n; j += 2)
        {
            var offset = (nuint)(2 * j);
            var p = Vector256.LoadUnsafe(ref pivotValues, offset);
            var swapped = Vector256.Shuffle(p, Vector256.Create(1L, 0L, 3L, 2L)) * sign;
            var product = (real * p) + (imaginary * swapped);
            (Vector256.LoadUnsafe(ref rowValues, offset) - product).StoreUnsafe(ref rowValues, offset);
        }

        return j;
    }

    /// <summary>
    /// |z| by one square root of re² + im²; <see cref="Complex.Abs"/> (a guarded hypot, several times slower) only
    /// where the square would overflow or lose digits to underflow.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    internal static double Modulus(Complex z)
    {
        var square = (z.Real * z.Real) + (z.Imaginary * z.Imaginary);
        return square is > 1e-290 and < double.PositiveInfinity ? Math.Sqrt(square) : Complex.Abs(z);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
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
