using System.Numerics;
using CsCheck;
using FiberWorkers.Algebra.LinearAlgebra;
using MathNet.Numerics.LinearAlgebra;
using Vector = MathNet.Numerics.LinearAlgebra.Vector<System.Numerics.Complex>;

namespace FiberWorkers.Algebra.Tests.LinearAlgebra;

public sealed class ComplexLuTests
{
    [Fact]
    public void Solutions_agree_with_MathNet_on_random_matrices()
    {
        Gen.Int[1, 9].SelectMany(n => Gen.Int[0, int.MaxValue].Select(seed => (n, seed))).Sample(
            sample =>
            {
                var (n, seed) = sample;
                var random = new Random(seed);
                var a = RandomMatrix(random, n);
                var b = Enumerable.Range(0, n).Select(_ => new Complex(random.NextDouble(), random.NextDouble())).ToArray();
                var reference = Matrix<Complex>.Build.Dense(n, n, (i, j) => a[(i * n) + j]).Solve(Vector.Build.DenseOfArray(b));

                var factors = (Complex[])a.Clone();
                var pivots = new int[n];
                Assert.True(ComplexLu.Factor(factors, n, pivots));
                var x = (Complex[])b.Clone();
                ComplexLu.Solve(factors, n, pivots, x);
                for (var i = 0; i < n; i++)
                {
                    Assert.True(Complex.Abs(x[i] - reference[i]) <= 1e-9 * (1 + reference.AbsoluteMaximum().Magnitude), $"entry {i}");
                }
            },
            iter: 300,
            seed: "0c2uHPOP5kF3");
    }

    [Fact]
    public void Vector_and_scalar_row_updates_give_bit_identical_factors()
    {
        // Atlas content must not depend on the machine's vector width: the 256-bit update rounds like Complex's
        // operators. Sizes 1–24 cover odd and even row tails; exact zeros exercise the skipped rows.
        Gen.Int[1, 24].SelectMany(n => Gen.Int[0, int.MaxValue].Select(seed => (n, seed))).Sample(
            sample =>
            {
                var (n, seed) = sample;
                var random = new Random(seed);
                var a = RandomMatrix(random, n);
                if (n > 2)
                {
                    a[n] = Complex.Zero;
                }

                var vector = (Complex[])a.Clone();
                var scalar = (Complex[])a.Clone();
                var vectorPivots = new int[n];
                var scalarPivots = new int[n];
                Assert.Equal(
                    ComplexLu.Factor(scalar, n, scalarPivots, vectorized: false), ComplexLu.Factor(vector, n, vectorPivots, vectorized: true));
                Assert.Equal(scalarPivots, vectorPivots);
                for (var i = 0; i < a.Length; i++)
                {
                    Assert.Equal(BitConverter.DoubleToInt64Bits(scalar[i].Real), BitConverter.DoubleToInt64Bits(vector[i].Real));
                    Assert.Equal(BitConverter.DoubleToInt64Bits(scalar[i].Imaginary), BitConverter.DoubleToInt64Bits(vector[i].Imaginary));
                }
            },
            iter: 400);
    }

    [Fact]
    public void Conjugate_transpose_solve_inverts_the_conjugate_transpose()
    {
        var random = new Random(9);
        const int n = 6;
        var a = RandomMatrix(random, n);
        var factors = (Complex[])a.Clone();
        var pivots = new int[n];
        ComplexLu.Factor(factors, n, pivots);
        var b = Enumerable.Range(0, n).Select(i => new Complex(i, 1 - i)).ToArray();
        var x = (Complex[])b.Clone();
        ComplexLu.SolveConjugateTranspose(factors, n, pivots, x);
        for (var i = 0; i < n; i++)
        {
            var row = Complex.Zero;
            for (var j = 0; j < n; j++)
            {
                row += Complex.Conjugate(a[(j * n) + i]) * x[j];
            }

            Assert.True(Complex.Abs(row - b[i]) < 1e-12, $"row {i}: {row} vs {b[i]}");
        }
    }

    [Fact]
    public void Condition_estimate_is_within_a_small_factor_of_the_exact_one_norm_condition_number()
    {
        var random = new Random(21);
        for (var trial = 0; trial < 100; trial++)
        {
            var n = random.Next(2, 9);
            var a = RandomMatrix(random, n);
            // Make some of them badly conditioned by scaling a column.
            if (trial % 3 == 0)
            {
                for (var i = 0; i < n; i++)
                {
                    a[(i * n) + (trial % n)] *= 1e-6;
                }
            }

            var matrix = Matrix<Complex>.Build.Dense(n, n, (i, j) => a[(i * n) + j]);
            var exact = matrix.L1Norm() * matrix.Inverse().L1Norm();
            var factors = (Complex[])a.Clone();
            var pivots = new int[n];
            ComplexLu.Factor(factors, n, pivots);
            var estimate = ComplexLu.OneNorm(a, n) * ComplexLu.EstimateInverseOneNorm(factors, n, pivots, new Complex[2 * n]);
            // Hager's estimate is a lower bound, in practice within a factor 3 (Higham 1988).
            Assert.InRange(estimate, exact / 3, exact * (1 + 1e-9));
        }
    }

    [Theory]
    [InlineData(3.0, -4.0)]
    [InlineData(1e-160, 2e-160)]
    [InlineData(1e-300, -1e-300)]
    [InlineData(3e160, 4e160)]
    [InlineData(1e300, 1e300)]
    [InlineData(0.0, 0.0)]
    [InlineData(-0.0, 5e-324)]
    public void Modulus_agrees_with_the_guarded_hypot_over_the_whole_range(double re, double im)
    {
        var z = new Complex(re, im);
        var exact = Complex.Abs(z);
        Assert.Equal(exact, ComplexLu.Modulus(z), exact * 1e-15);
        Assert.True(double.IsNaN(ComplexLu.Modulus(new Complex(double.NaN, 1))));
        Assert.Equal(double.PositiveInfinity, ComplexLu.Modulus(new Complex(double.PositiveInfinity, 1)));
    }

    [Fact]
    public void Exactly_singular_matrices_are_reported()
    {
        Complex[] a = [1, 2, 2, 4];
        Assert.False(ComplexLu.Factor(a, 2, new int[2]));
    }

    private static Complex[] RandomMatrix(Random random, int n) =>
        [.. Enumerable.Range(0, n * n).Select(_ => new Complex((2 * random.NextDouble()) - 1, (2 * random.NextDouble()) - 1))];
}
