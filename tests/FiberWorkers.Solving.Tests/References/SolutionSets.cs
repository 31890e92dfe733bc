using System.Numerics;

namespace FiberWorkers.Solving.Tests.References;

/// <summary>Comparisons of solution sets that do not depend on the order the solver returns them in.</summary>
internal static class SolutionSets
{
    /// <summary>max_i |a_i − b_i| / (1 + max_i |a_i|): the relative distance used by every comparison here.</summary>
    public static double RelativeDistance(ReadOnlySpan<Complex> a, ReadOnlySpan<Complex> b)
    {
        var distance = 0.0;
        var scale = 0.0;
        for (var i = 0; i < a.Length; i++)
        {
            var d = Complex.Abs(a[i] - b[i]);
            distance = double.IsNaN(d) ? double.PositiveInfinity : Math.Max(distance, d);
            scale = Math.Max(scale, a[i].Magnitude);
        }

        return distance / (1 + scale);
    }

    /// <summary>
    /// Asserts a one-to-one matching between the two sets within <paramref name="tolerance"/> (relative): each
    /// expected point takes the nearest unused actual point. Greedy matching is exact when the points of each
    /// set are much farther apart than the tolerance, which every caller checks or knows.
    /// </summary>
    public static void AssertSame(
        IReadOnlyList<Complex[]> expected, IReadOnlyList<Complex[]> actual, double tolerance, string context)
    {
        Assert.True(expected.Count == actual.Count, $"{context}: {expected.Count} expected solutions, {actual.Count} found");
        var used = new bool[actual.Count];
        foreach (var point in expected)
        {
            var best = -1;
            var bestDistance = double.PositiveInfinity;
            for (var j = 0; j < actual.Count; j++)
            {
                var distance = RelativeDistance(point, actual[j]);
                if (!used[j] && distance < bestDistance)
                {
                    best = j;
                    bestDistance = distance;
                }
            }

            Assert.True(
                best >= 0 && bestDistance <= tolerance,
                $"{context}: no match within {tolerance:E1} for ({Format(point)}); nearest at {bestDistance:E2}");
            used[best] = true;
        }
    }

    /// <summary>The smallest relative distance between two points of the set (∞ for fewer than two).</summary>
    public static double MinimumSeparation(IReadOnlyList<Complex[]> points)
    {
        var separation = double.PositiveInfinity;
        for (var i = 0; i < points.Count; i++)
        {
            for (var j = i + 1; j < points.Count; j++)
            {
                separation = Math.Min(separation, RelativeDistance(points[i], points[j]));
            }
        }

        return separation;
    }

    /// <summary>The largest |Im| over the coordinates.</summary>
    public static double MaxImaginary(ReadOnlySpan<Complex> point)
    {
        var largest = 0.0;
        foreach (var z in point)
        {
            largest = Math.Max(largest, Math.Abs(z.Imaginary));
        }

        return largest;
    }

    /// <summary>The point as text for assertion messages.</summary>
    public static string Format(ReadOnlySpan<Complex> point)
    {
        var parts = new string[point.Length];
        for (var i = 0; i < point.Length; i++)
        {
            var (re, im) = (point[i].Real, point[i].Imaginary);
            parts[i] = FormattableString.Invariant($"{re:G6}{(im < 0 ? '-' : '+')}{Math.Abs(im):G3}i");
        }

        return string.Join(", ", parts);
    }
}
