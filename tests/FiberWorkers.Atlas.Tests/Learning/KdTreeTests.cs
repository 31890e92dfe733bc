using CsCheck;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Learning;

public sealed class KdTreeTests
{
    [Fact]
    public void Nearest_neighbours_agree_with_brute_force_in_dimensions_one_to_six_with_duplicates_and_points_on_splits()
    {
        // Coordinates on a coarse grid make many duplicates and many points exactly on split planes.
        Gen.Int[1, 6].SelectMany(d => Gen.Int[1, 400].Select(n => (d, n))).SelectMany(s => Gen.Int[0, int.MaxValue].Select(seed => (s.d, s.n, seed)))
            .Sample(
                sample =>
                {
                    var (dimension, count, seed) = sample;
                    var random = new Random(seed);
                    var points = new double[count * dimension];
                    for (var i = 0; i < points.Length; i++)
                    {
                        points[i] = Math.Round(random.NextDouble() * 8) / 8;
                    }

                    var tree = new KdTree(points, dimension);
                    var query = new double[dimension];
                    for (var q = 0; q < 20; q++)
                    {
                        for (var k = 0; k < dimension; k++)
                        {
                            query[k] = random.NextDouble() < 0.3 ? Math.Round(random.NextDouble() * 8) / 8 : random.NextDouble();
                        }

                        var fast = tree.Nearest(query);
                        var slow = tree.NearestByScan(query);
                        Assert.Equal(slow.SquaredDistance, fast.SquaredDistance);
                        // Ties go to the smaller index, the scan's rule too.
                        Assert.Equal(slow.Index, fast.Index);
                    }
                },
                iter: 300,
                seed: "7Yf2V0dRzC0b");
    }

    [Fact]
    public void K_nearest_are_the_k_smallest_distances_in_order()
    {
        var random = new Random(5);
        const int dimension = 3;
        var points = new double[500 * dimension];
        for (var i = 0; i < points.Length; i++)
        {
            points[i] = random.NextDouble();
        }

        var tree = new KdTree(points, dimension);
        Span<int> indices = stackalloc int[7];
        Span<double> distances = stackalloc double[7];
        for (var q = 0; q < 50; q++)
        {
            double[] query = [random.NextDouble(), random.NextDouble(), random.NextDouble()];
            var found = tree.Nearest(query, indices, distances);
            Assert.Equal(7, found);
            var expected = Enumerable.Range(0, 500)
                .Select(i => (Index: i, Distance: Enumerable.Range(0, dimension).Sum(k => Math.Pow(query[k] - points[(i * dimension) + k], 2))))
                .OrderBy(p => p.Distance).ThenBy(p => p.Index).Take(7).ToArray();
            for (var i = 0; i < 7; i++)
            {
                Assert.Equal(expected[i].Index, indices[i]);
                Assert.Equal(expected[i].Distance, distances[i], 12);
            }
        }
    }

    [Fact]
    public void K_nearest_on_a_grid_break_ties_by_index_like_a_full_sort()
    {
        // Grid coordinates: many equal distances and points on split planes, where the incremental cell bound must
        // not prune a cell that holds an exact tie.
        for (var dimension = 1; dimension <= 4; dimension++)
        {
            var random = new Random(40 + dimension);
            var points = new double[600 * dimension];
            for (var i = 0; i < points.Length; i++)
            {
                points[i] = Math.Round(random.NextDouble() * 6) / 6;
            }

            var tree = new KdTree(points, dimension);
            var indices = new int[9];
            var distances = new double[9];
            for (var q = 0; q < 40; q++)
            {
                var query = Enumerable.Range(0, dimension).Select(_ => Math.Round(random.NextDouble() * 12) / 12).ToArray();
                var found = tree.Nearest(query, indices, distances);
                var expected = Enumerable.Range(0, 600)
                    .Select(i => (Index: i, Distance: SquaredDistance(query, points.AsSpan(i * dimension, dimension))))
                    .OrderBy(p => p.Distance).ThenBy(p => p.Index).Take(9).ToArray();
                Assert.Equal(9, found);
                Assert.Equal(expected.Select(e => e.Index), indices);
                Assert.Equal(expected.Select(e => e.Distance), distances);
            }
        }
    }

    /// <summary>The tree's own summation order: coordinate by coordinate from zero.</summary>
    private static double SquaredDistance(double[] query, ReadOnlySpan<double> point)
    {
        var sum = 0.0;
        for (var k = 0; k < point.Length; k++)
        {
            var difference = query[k] - point[k];
            sum += difference * difference;
        }

        return sum;
    }

    [Fact]
    public void Radius_limited_queries_return_exactly_the_nearest_points_within_the_radius()
    {
        var random = new Random(41);
        for (var dimension = 1; dimension <= 4; dimension++)
        {
            var points = new double[800 * dimension];
            for (var i = 0; i < points.Length; i++)
            {
                points[i] = Math.Round(random.NextDouble() * 20) / 20; // duplicates and points on splits
            }

            var tree = new KdTree(points, dimension);
            var indices = new int[9];
            var distances = new double[9];
            for (var q = 0; q < 200; q++)
            {
                var query = Enumerable.Range(0, dimension).Select(_ => random.NextDouble()).ToArray();
                var radius = 0.02 + (0.2 * random.NextDouble());
                var found = tree.Nearest(query, indices, distances, radius * radius);
                var expected = Enumerable.Range(0, 800)
                    .Select(i => (Index: i, Distance: Enumerable.Range(0, dimension).Sum(k => Math.Pow(query[k] - points[(i * dimension) + k], 2))))
                    .Where(p => p.Distance <= radius * radius)
                    .OrderBy(p => p.Distance).ThenBy(p => p.Index).Take(9).ToArray();
                Assert.Equal(expected.Length, found);
                for (var i = 0; i < found; i++)
                {
                    Assert.Equal(expected[i].Index, indices[i]);
                }
            }
        }
    }

    [Fact]
    public void Queries_allocate_nothing()
    {
        var random = new Random(9);
        var points = new double[10_000 * 3];
        for (var i = 0; i < points.Length; i++)
        {
            points[i] = random.NextDouble();
        }

        var tree = new KdTree(points, 3);
        double[] query = [0.3, 0.6, 0.1];
        tree.Nearest(query);
        var sum = 0;
        var bytes = Allocations.FewestBytes(() =>
        {
            for (var i = 0; i < 10_000; i++)
            {
                query[0] = i / 10_000.0;
                sum += tree.Nearest(query).Index;
            }
        });

        Assert.Equal(0, bytes);
        Assert.True(sum >= 0);
    }

    [Fact]
    public void Non_finite_points_are_refused()
    {
        Assert.Throws<ArgumentException>(() => new KdTree([0.1, double.NaN], 2));
        Assert.Throws<ArgumentException>(() => new KdTree([0.1, 0.2, 0.3], 2));
        var tree = new KdTree([0.1, 0.2], 2);
        Assert.Throws<ArgumentOutOfRangeException>(() => tree.Nearest([0.1, 0.2], new int[1], new double[1], double.NaN));
        Assert.Throws<ArgumentOutOfRangeException>(() => tree.Nearest([0.1, 0.2], new int[1], new double[1], -1));
    }
}
