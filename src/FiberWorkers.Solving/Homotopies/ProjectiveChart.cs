using System.Numerics;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Solving.Homotopies;

/// <summary>
/// A random affine chart c·X = 1 of projective space P^n (Morgan 1986): tracking the homogenized system in this
/// chart keeps paths that diverge in C^n finite, with the homogenizing coordinate X₀ → 0.
/// </summary>
internal sealed class ProjectiveChart
{
    public ProjectiveChart(Complex[] coefficients)
    {
        ArgumentNullException.ThrowIfNull(coefficients);
        Coefficients = coefficients;
    }

    /// <summary>c, one coefficient per homogeneous coordinate (X₀ first).</summary>
    public Complex[] Coefficients { get; }

    /// <summary>n + 1.</summary>
    public int Length => Coefficients.Length;

    /// <summary>A chart with coefficients of modulus one and random phases, from a seeded generator.</summary>
    public static ProjectiveChart Random(int length, SeededRandom random)
    {
        var c = new Complex[length];
        for (var i = 0; i < length; i++)
        {
            c[i] = random.NextUnitComplex();
        }

        return new ProjectiveChart(c);
    }

    /// <summary>Maps an affine point x to homogeneous X = (1, x) scaled into the chart.</summary>
    public void Lift(ReadOnlySpan<Complex> affine, Span<Complex> homogeneous)
    {
        homogeneous[0] = Complex.One;
        affine.CopyTo(homogeneous[1..]);
        var dot = Complex.Zero;
        for (var i = 0; i < homogeneous.Length; i++)
        {
            dot += Coefficients[i] * homogeneous[i];
        }

        var scale = Complex.One / dot;
        for (var i = 0; i < homogeneous.Length; i++)
        {
            homogeneous[i] *= scale;
        }
    }

    /// <summary>c·X − 1, the chart equation's value.</summary>
    public Complex Residual(ReadOnlySpan<Complex> homogeneous)
    {
        var dot = Complex.Zero;
        for (var i = 0; i < homogeneous.Length; i++)
        {
            dot += Coefficients[i] * homogeneous[i];
        }

        return dot - Complex.One;
    }
}
