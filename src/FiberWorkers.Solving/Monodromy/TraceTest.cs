using System.Numerics;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Homotopies;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Solving.Tracking;

namespace FiberWorkers.Solving.Monodromy;

/// <summary>
/// The linear trace test (Leykin, Rodriguez &amp; Sottile 2018) for the fiber F(x; p₀) = 0. Free the constant
/// term of the first equation as a new unknown q: F₁(x) + q = 0, F₂(x) = 0, …, Fₙ(x) = 0 is a curve C in
/// (x, q)-space, and the fiber is C ∩ {q = 0}. The slices q = −σ, taken in a random projective chart so that
/// they form a pencil of parallel hyperplanes with a base in general position (see <see cref="PencilHomotopy"/>),
/// meet C in points whose sum is affine in σ exactly when all of them are counted. Tracking the known fiber to
/// two random σ and testing that affinity decides completeness; a missing solution leaves an O(1) deviation.
/// </summary>
internal sealed class TraceTest(PolynomialSystem system, SolveOptions solve, double tolerance)
{
    /// <summary>Paths of the pencil tracked by every run so far (one per solution and slice tried).</summary>
    public long PathsTracked { get; private set; }

    public (TraceTestResult? Result, string? Skipped) Run(Complex[] parameters, IReadOnlyList<Complex[]> fiber, SeededRandom random)
    {
        if (fiber.Count == 0)
        {
            return (null, "the fiber is empty");
        }

        var n = system.UnknownCount;
        var curve = CurveSystem(system).Homogenize().Compile();
        var chart = ProjectiveChart.Random(n + 2, random);
        var sigmas = new[] { random.NextComplexGaussian(), random.NextComplexGaussian() };
        var slice = n + 1;
        var start = fiber.Select(x =>
        {
            var z = new Complex[n + 2];
            chart.Lift([.. x, Complex.Zero], z);
            return z;
        }).ToArray();
        var sums = new Complex[3][];
        sums[0] = Sum(start);
        for (var k = 0; k < 2; k++)
        {
            var homotopy = new PencilHomotopy(curve, parameters, chart, slice, sigmas[k]);
            var moved = new Complex[start.Length][];
            var failed = 0;
            PathsTracked += start.Length;
            // Paths are independent and summed in index order, so threads do not change the verdict.
            Parallel.For(
                0,
                start.Length,
                new ParallelOptions { MaxDegreeOfParallelism = Math.Max(1, solve.MaxDegreeOfParallelism) },
                () => new PathTracker(homotopy.CreateEvaluator()),
                (i, _, tracker) =>
                {
                    var z = (Complex[])start[i].Clone();
                    if (tracker.Track(z, 0, 1, solve.Tracker).Completed)
                    {
                        tracker.Refine(z, 1, 3, 1e-15);
                    }
                    else
                    {
                        Interlocked.Increment(ref failed);
                    }

                    moved[i] = z;
                    return tracker;
                },
                _ => { });
            if (failed > 0)
            {
                return (null, "inconclusive: a path of the pencil failed");
            }

            sums[k + 1] = Sum(moved);
        }

        var ratio = sigmas[1] / sigmas[0];
        var deviation = 0.0;
        for (var i = 0; i < sums[0].Length; i++)
        {
            var d = sums[2][i] - sums[0][i] - (ratio * (sums[1][i] - sums[0][i]));
            deviation += d.Magnitude * d.Magnitude;
        }

        var scale = start.Sum(z => Math.Sqrt(z.Sum(v => v.Magnitude * v.Magnitude)));
        var relative = Math.Sqrt(deviation) / scale;
        return (new TraceTestResult(0, relative, relative <= tolerance), null);
    }

    /// <summary>F₁ + q, F₂, …, Fₙ over unknowns (x, q) and the family's parameters.</summary>
    private static PolynomialSystem CurveSystem(PolynomialSystem system)
    {
        var n = system.UnknownCount;
        var m = system.ParameterCount;
        var map = new int[n + m];
        for (var v = 0; v < n + m; v++)
        {
            map[v] = v < n ? v : v + 1;
        }

        var equations = new Polynomial[system.Equations.Count];
        for (var i = 0; i < equations.Length; i++)
        {
            equations[i] = system.Equations[i].Remap(n + 1 + m, map);
        }

        equations[0] = equations[0].Add(Polynomial.Variable(n + 1 + m, n));
        return new PolynomialSystem([.. system.Unknowns, system.FreshName("q")], system.Parameters, equations);
    }

    private static Complex[] Sum(IReadOnlyList<Complex[]> points)
    {
        var sum = new Complex[points[0].Length];
        foreach (var point in points)
        {
            for (var i = 0; i < sum.Length; i++)
            {
                sum[i] += point[i];
            }
        }

        return sum;
    }
}
