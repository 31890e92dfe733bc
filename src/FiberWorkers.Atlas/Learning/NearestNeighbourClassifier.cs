namespace FiberWorkers.Atlas.Learning;

/// <summary>
/// k-nearest-neighbour classification over a sample set with a <see cref="KdTree"/>: the label of the nearest
/// sample (k = 1), or the majority of the k nearest (ties to the label of the nearest among them). With exact labels
/// and dense samples the 1-NN error tends to zero (Cover &amp; Hart 1967). Also answers which solved sample is
/// nearest, which the real-only resolve starts from.
/// </summary>
public sealed class NearestNeighbourClassifier : RegionClassifier
{
    private const int MaxK = 64;

    public NearestNeighbourClassifier(SampleSet samples, int k = 1)
    {
        ArgumentNullException.ThrowIfNull(samples);
        ArgumentOutOfRangeException.ThrowIfLessThan(k, 1);
        ArgumentOutOfRangeException.ThrowIfGreaterThan(k, MaxK);
        if (samples.Count == 0)
        {
            throw new ArgumentException("no samples to classify with", nameof(samples));
        }

        Samples = samples;
        K = k;
        var clock = System.Diagnostics.Stopwatch.StartNew();
        Tree = new KdTree(samples.Points, samples.Dimension);
        BuildTime = clock.Elapsed;
    }

    /// <inheritdoc />
    public override string Name => K == 1 ? "nn1" : "knn";

    /// <summary>Neighbours that vote.</summary>
    public int K { get; }

    /// <summary>The samples.</summary>
    public SampleSet Samples { get; }

    /// <summary>The tree over the samples' normalized points.</summary>
    public KdTree Tree { get; }

    /// <summary>Time to build the tree.</summary>
    public TimeSpan BuildTime { get; }

    /// <inheritdoc />
    public override int Classify(ReadOnlySpan<double> normalized)
    {
        if (K == 1)
        {
            return Samples.Labels[Tree.Nearest(normalized).Index];
        }

        Span<int> indices = stackalloc int[K];
        Span<double> distances = stackalloc double[K];
        var found = Tree.Nearest(normalized, indices, distances);
        var bestLabel = Samples.Labels[indices[0]];
        var bestVotes = 0;
        for (var i = 0; i < found; i++)
        {
            var label = Samples.Labels[indices[i]];
            var votes = 0;
            for (var j = 0; j < found; j++)
            {
                votes += Samples.Labels[indices[j]] == label ? 1 : 0;
            }

            // Strictly more votes wins; on a tie the label met first (the nearer neighbour) stays.
            if (votes > bestVotes)
            {
                bestVotes = votes;
                bestLabel = label;
            }
        }

        return bestLabel;
    }

    /// <summary>The nearest samples, closest first, into caller-owned spans; returns how many.</summary>
    public int Nearest(ReadOnlySpan<double> normalized, Span<int> indices, Span<double> squaredDistances) =>
        Tree.Nearest(normalized, indices, squaredDistances);
}
