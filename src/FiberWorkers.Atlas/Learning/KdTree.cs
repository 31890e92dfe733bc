using System.Runtime.CompilerServices;

namespace FiberWorkers.Atlas.Learning;

/// <summary>
/// A k-d tree (Bentley 1975) for exact nearest-neighbour queries in a few dimensions: points are split at the median
/// of the axis of largest spread into buckets of a few points; queries descend to the query's bucket, then visit other
/// buckets only when their box is nearer than the best distance so far (Friedman, Bentley &amp; Finkel 1977), that
/// distance kept per axis and updated incrementally (Arya &amp; Mount 1993). Queries allocate nothing (recursion of
/// the tree's depth, per-axis offsets on the stack); ties go to the smaller point index, so answers are
/// deterministic. Immutable after construction and safe for concurrent queries.
/// </summary>
public sealed class KdTree
{
    private const int BucketSize = 16;
    private const int MaxDepth = 64;
    private const double BoundSlack = 1e-12;

    private readonly double[] _points;
    private readonly int[] _order;
    private readonly Node[] _nodes;

    /// <summary>The points again, in tree order: a leaf's points are contiguous, so a scan touches few cache lines.</summary>
    private readonly double[] _leafPoints;

    /// <summary>Builds the tree over <paramref name="points"/> (row-major, <paramref name="dimension"/> per point).</summary>
    public KdTree(double[] points, int dimension)
    {
        ArgumentNullException.ThrowIfNull(points);
        ArgumentOutOfRangeException.ThrowIfLessThan(dimension, 1);
        if (points.Length % dimension != 0)
        {
            throw new ArgumentException($"{points.Length} values are not a whole number of {dimension}-dimensional points", nameof(points));
        }

        foreach (var value in points)
        {
            if (!double.IsFinite(value))
            {
                throw new ArgumentException("points must be finite", nameof(points));
            }
        }

        Dimension = dimension;
        Count = points.Length / dimension;
        _points = points;
        _order = new int[Count];
        for (var i = 0; i < Count; i++)
        {
            _order[i] = i;
        }

        var nodes = new List<Node>(Math.Max(1, 2 * Count / BucketSize));
        if (Count > 0)
        {
            Build(nodes, 0, Count, 0);
        }

        _nodes = [.. nodes];
        _leafPoints = new double[points.Length];
        for (var p = 0; p < Count; p++)
        {
            Array.Copy(points, _order[p] * dimension, _leafPoints, p * dimension, dimension);
        }
    }

    /// <summary>The dimension of the points.</summary>
    public int Dimension { get; }

    /// <summary>The number of points.</summary>
    public int Count { get; }

    /// <summary>Approximate memory held by the tree, in bytes.</summary>
    public long MemoryBytes => (_points.Length * 16L) + (_order.Length * 4L) + (_nodes.Length * (long)Unsafe.SizeOf<Node>());

    /// <summary>Coordinate <paramref name="axis"/> of point <paramref name="index"/>.</summary>
    public double Coordinate(int index, int axis) => _points[(index * Dimension) + axis];

    /// <summary>The nearest point to <paramref name="query"/>: its index and squared Euclidean distance.</summary>
    public (int Index, double SquaredDistance) Nearest(ReadOnlySpan<double> query)
    {
        if (query.Length != Dimension)
        {
            throw new ArgumentException($"the query has {query.Length} coordinates, the tree {Dimension}", nameof(query));
        }

        if (Count == 0)
        {
            return (-1, double.PositiveInfinity);
        }

        Span<double> offsets = stackalloc double[Dimension];
        offsets.Clear();
        var best = (Index: -1, SquaredDistance: double.PositiveInfinity);
        SearchOne(0, query, offsets, 0, ref best);
        return best;
    }

    /// <summary>
    /// Depth-first 1-NN search with the incremental cell distance (Arya &amp; Mount 1993): <paramref name="offsets"/>
    /// holds the query's distance to the current cell along each axis and <paramref name="bound"/> the sum of their
    /// squares, a tighter bound than the distance to the last split alone.
    /// </summary>
    private void SearchOne(int nodeIndex, ReadOnlySpan<double> query, Span<double> offsets, double bound, ref (int Index, double SquaredDistance) best)
    {
        ref readonly var node = ref _nodes[nodeIndex];
        if (node.Axis < 0)
        {
            ScanLeaf(node.Start, node.End, query, ref best);
            return;
        }

        var axis = node.Axis;
        var difference = query[axis] - node.Split;
        var (near, far) = difference <= 0 ? (nodeIndex + 1, node.Right) : (node.Right, nodeIndex + 1);
        SearchOne(near, query, offsets, bound, ref best);
        var previous = offsets[axis];
        var farBound = bound - (previous * previous) + (difference * difference);
        // The bound is summed in another order than a point's distance; the slack keeps rounding from pruning a
        // cell that holds an exact tie (smaller index wins).
        if (farBound * (1 - BoundSlack) <= best.SquaredDistance)
        {
            offsets[axis] = difference;
            SearchOne(far, query, offsets, farBound, ref best);
            offsets[axis] = previous;
        }
    }

    private void ScanLeaf(int start, int end, ReadOnlySpan<double> query, ref (int Index, double SquaredDistance) best)
    {
        var points = _leafPoints;
        if (Dimension == 3)
        {
            // The common case (three parameters) unrolled; the same arithmetic, in the same order, as below.
            double q0 = query[0], q1 = query[1], q2 = query[2];
            for (var p = start; p < end; p++)
            {
                var at = p * 3;
                double d0 = q0 - points[at], d1 = q1 - points[at + 1], d2 = q2 - points[at + 2];
                var distance = (d0 * d0) + (d1 * d1) + (d2 * d2);
                if (distance <= best.SquaredDistance && Before(distance, _order[p], best.SquaredDistance, best.Index))
                {
                    best = (_order[p], distance);
                }
            }

            return;
        }

        for (var p = start; p < end; p++)
        {
            var distance = SquaredDistance(query, points.AsSpan(p * Dimension, Dimension));
            if (distance <= best.SquaredDistance && Before(distance, _order[p], best.SquaredDistance, best.Index))
            {
                best = (_order[p], distance);
            }
        }
    }

    /// <summary>
    /// The k = <paramref name="indices"/>.Length nearest points, closest first, into caller-owned spans; returns how
    /// many were found (fewer when the tree holds fewer points).
    /// </summary>
    public int Nearest(ReadOnlySpan<double> query, Span<int> indices, Span<double> squaredDistances) =>
        Nearest(query, indices, squaredDistances, double.PositiveInfinity);

    /// <summary>
    /// As <see cref="Nearest(ReadOnlySpan{double}, Span{int}, Span{double})"/>, but only points within
    /// √<paramref name="maxSquaredDistance"/> of the query: cells farther away are never opened, so a small radius
    /// costs a few leaves.
    /// </summary>
    public int Nearest(ReadOnlySpan<double> query, Span<int> indices, Span<double> squaredDistances, double maxSquaredDistance)
    {
        if (!(maxSquaredDistance >= 0))
        {
            throw new ArgumentOutOfRangeException(nameof(maxSquaredDistance), maxSquaredDistance, "the squared radius must be a non-negative number");
        }

        if (query.Length != Dimension)
        {
            throw new ArgumentException($"the query has {query.Length} coordinates, the tree {Dimension}", nameof(query));
        }

        var k = Math.Min(indices.Length, squaredDistances.Length);
        if (k == 0 || Count == 0)
        {
            return 0;
        }

        Span<double> offsets = stackalloc double[Dimension];
        offsets.Clear();
        var search = new Search(k, maxSquaredDistance);
        SearchMany(0, query, offsets, 0, indices, squaredDistances, ref search);
        return search.Found;
    }

    /// <summary>State of a k-nearest search: points found so far, how many are wanted, the radius.</summary>
    private struct Search(int k, double maxSquaredDistance)
    {
        public int Found;
        public readonly int K = k;
        public readonly double MaxSquaredDistance = maxSquaredDistance;
    }

    /// <summary>The k-nearest search, with the same incremental cell distance as <see cref="SearchOne"/>.</summary>
    private void SearchMany(
        int nodeIndex, ReadOnlySpan<double> query, Span<double> offsets, double bound, Span<int> indices, Span<double> squaredDistances, ref Search search)
    {
        ref readonly var node = ref _nodes[nodeIndex];
        if (node.Axis < 0)
        {
            for (var p = node.Start; p < node.End; p++)
            {
                var distance = SquaredDistance(query, _leafPoints.AsSpan(p * Dimension, Dimension));
                if (distance <= search.MaxSquaredDistance)
                {
                    search.Found = Insert(_order[p], distance, indices, squaredDistances, search.Found, search.K);
                }
            }

            return;
        }

        var axis = node.Axis;
        var difference = query[axis] - node.Split;
        var (near, far) = difference <= 0 ? (nodeIndex + 1, node.Right) : (node.Right, nodeIndex + 1);
        SearchMany(near, query, offsets, bound, indices, squaredDistances, ref search);
        var previous = offsets[axis];
        var farBound = bound - (previous * previous) + (difference * difference);
        var prune = farBound * (1 - BoundSlack);
        if (prune <= search.MaxSquaredDistance && (search.Found < search.K || prune <= squaredDistances[search.K - 1]))
        {
            offsets[axis] = difference;
            SearchMany(far, query, offsets, farBound, indices, squaredDistances, ref search);
            offsets[axis] = previous;
        }
    }

    /// <summary>Brute-force nearest neighbour, the reference the tree is tested against.</summary>
    public (int Index, double SquaredDistance) NearestByScan(ReadOnlySpan<double> query)
    {
        var best = -1;
        var bestDistance = double.PositiveInfinity;
        for (var i = 0; i < Count; i++)
        {
            var distance = SquaredDistance(query, _points.AsSpan(i * Dimension, Dimension));
            if (distance < bestDistance)
            {
                best = i;
                bestDistance = distance;
            }
        }

        return (best, bestDistance);
    }

    private static int Insert(int index, double distance, Span<int> indices, Span<double> distances, int found, int k)
    {
        if (found == k && !Before(distance, index, distances[k - 1], indices[k - 1]))
        {
            return found;
        }

        var position = found < k ? found : k - 1;
        while (position > 0 && Before(distance, index, distances[position - 1], indices[position - 1]))
        {
            distances[position] = distances[position - 1];
            indices[position] = indices[position - 1];
            position--;
        }

        distances[position] = distance;
        indices[position] = index;
        return found < k ? found + 1 : k;
    }

    /// <summary>Closer first; equal distances by smaller index (deterministic ties).</summary>
    private static bool Before(double distance, int index, double otherDistance, int otherIndex) =>
        distance < otherDistance || (distance == otherDistance && index < otherIndex);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static double SquaredDistance(ReadOnlySpan<double> query, ReadOnlySpan<double> point)
    {
        var sum = 0.0;
        for (var d = 0; d < point.Length; d++)
        {
            var difference = query[d] - point[d];
            sum += difference * difference;
        }

        return sum;
    }

    private int Build(List<Node> nodes, int start, int end, int depth)
    {
        var self = nodes.Count;
        nodes.Add(default);
        if (end - start <= BucketSize || depth >= MaxDepth - 1)
        {
            nodes[self] = new Node(0, -1, start, end);
            return self;
        }

        var axis = WidestAxis(start, end);
        var middle = (start + end) / 2;
        Select(start, end, middle, axis);
        var split = Coordinate(_order[middle], axis);
        Build(nodes, start, middle, depth + 1); // the left child is always the next node (depth-first layout)
        var right = Build(nodes, middle, end, depth + 1);
        nodes[self] = new Node(split, axis, right, 0);
        return self;
    }

    private int WidestAxis(int start, int end)
    {
        var best = 0;
        var bestSpread = -1.0;
        for (var axis = 0; axis < Dimension; axis++)
        {
            var low = double.PositiveInfinity;
            var high = double.NegativeInfinity;
            for (var p = start; p < end; p++)
            {
                var value = Coordinate(_order[p], axis);
                low = Math.Min(low, value);
                high = Math.Max(high, value);
            }

            if (high - low > bestSpread)
            {
                bestSpread = high - low;
                best = axis;
            }
        }

        return best;
    }

    /// <summary>
    /// Reorders _order[start, end) so that position <paramref name="nth"/> holds the element of that rank by
    /// (coordinate, index), everything before it no larger and everything after no smaller (Hoare's selection).
    /// Points on the split go left or right consistently, which the search's ≤ handles.
    /// </summary>
    private void Select(int start, int end, int nth, int axis)
    {
        var low = start;
        var high = end - 1;
        while (low < high)
        {
            var pivot = _order[(low + high) >>> 1];
            var pivotValue = Coordinate(pivot, axis);
            var i = low;
            var j = high;
            while (i <= j)
            {
                while (BelowPivot(_order[i], pivot, pivotValue, axis))
                {
                    i++;
                }

                while (AbovePivot(_order[j], pivot, pivotValue, axis))
                {
                    j--;
                }

                if (i <= j)
                {
                    (_order[i], _order[j]) = (_order[j], _order[i]);
                    i++;
                    j--;
                }
            }

            if (nth <= j)
            {
                high = j;
            }
            else if (nth >= i)
            {
                low = i;
            }
            else
            {
                return;
            }
        }
    }

    /// <summary>(coordinate, index) of point a is below the pivot's.</summary>
    private bool BelowPivot(int a, int pivot, double pivotValue, int axis)
    {
        var value = Coordinate(a, axis);
        return value < pivotValue || (value == pivotValue && a < pivot);
    }

    /// <summary>(coordinate, index) of point b is above the pivot's.</summary>
    private bool AbovePivot(int b, int pivot, double pivotValue, int axis)
    {
        var value = Coordinate(b, axis);
        return value > pivotValue || (value == pivotValue && b > pivot);
    }

    /// <summary>
    /// A node in 24 bytes: a leaf (<see cref="Axis"/> &lt; 0) holds tree-order positions [A, B); an inner node splits
    /// at <see cref="Split"/> on <see cref="Axis"/>, its left child is the next node and A is its right child.
    /// </summary>
    private readonly record struct Node(double Split, int Axis, int A, int B)
    {
        public int Start => A;

        public int End => B;

        public int Right => A;
    }
}
