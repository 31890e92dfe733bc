using BenchmarkDotNet.Attributes;
using FiberWorkers.Atlas.Learning;

namespace FiberWorkers.Benchmarks;

/// <summary>
/// Nearest-neighbour queries of the k-d tree over 10⁵ uniform samples in 3-D, one core (issue target: at least
/// 1,000,000 queries per second, i.e. under 1 µs per query), against the linear scan it replaces.
/// </summary>
[MemoryDiagnoser]
public class NearestNeighbourBenchmarks
{
    private const int Queries = 4096;
    private KdTree _tree = null!;
    private double[] _queries = null!;

    [Params(100_000)]
    public int Samples { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        var random = new Random(3);
        var points = new double[Samples * 3];
        for (var i = 0; i < points.Length; i++)
        {
            points[i] = random.NextDouble();
        }

        _tree = new KdTree(points, 3);
        _queries = new double[Queries * 3];
        for (var i = 0; i < _queries.Length; i++)
        {
            _queries[i] = random.NextDouble();
        }
    }

    [Benchmark(Baseline = true, OperationsPerInvoke = Queries, Description = "k-d tree, one query")]
    public long Tree()
    {
        long sum = 0;
        for (var q = 0; q < Queries; q++)
        {
            sum += _tree.Nearest(_queries.AsSpan(q * 3, 3)).Index;
        }

        return sum;
    }

    [Benchmark(OperationsPerInvoke = 64, Description = "linear scan, one query")]
    public long Scan()
    {
        long sum = 0;
        for (var q = 0; q < 64; q++)
        {
            sum += _tree.NearestByScan(_queries.AsSpan(q * 3, 3)).Index;
        }

        return sum;
    }
}
