namespace FiberWorkers.Atlas.Maps;

/// <summary>
/// Exact nearest neighbour among points of the unit square, by buckets on a uniform grid searched in rings of
/// growing Chebyshev radius: a ring r further out holds no point closer than r bucket widths, so the search stops
/// once the best distance is within that bound. Ties go to the lowest point index, so results are deterministic.
/// Enough for a map's background over one slice; the atlas-wide classifier is a k-d tree of its own.
/// </summary>
internal sealed class NearestLabelGrid
{
    private readonly double[] _u;
    private readonly double[] _v;
    private readonly int _cells;
    private readonly int[] _bucketStart;
    private readonly int[] _bucketPoints;

    /// <summary>Indexes the points (u, v), coordinates normally in [0, 1]; points outside land in edge buckets.</summary>
    public NearestLabelGrid(double[] u, double[] v)
    {
        ArgumentNullException.ThrowIfNull(u);
        ArgumentNullException.ThrowIfNull(v);
        ArgumentOutOfRangeException.ThrowIfNotEqual(v.Length, u.Length);
        ArgumentOutOfRangeException.ThrowIfZero(u.Length);
        _u = u;
        _v = v;
        // About two points per bucket keeps both the bucket scan and the ring count small.
        _cells = Math.Clamp((int)Math.Sqrt(u.Length / 2.0), 1, 2048);
        var counts = new int[(_cells * _cells) + 1];
        for (var i = 0; i < u.Length; i++)
        {
            counts[Bucket(u[i], v[i]) + 1]++;
        }

        for (var b = 1; b < counts.Length; b++)
        {
            counts[b] += counts[b - 1];
        }

        _bucketStart = (int[])counts.Clone();
        _bucketPoints = new int[u.Length];
        for (var i = 0; i < u.Length; i++)
        {
            _bucketPoints[counts[Bucket(u[i], v[i])]++] = i;
        }
    }

    /// <summary>The index of the point nearest to (u, v) in the Euclidean distance.</summary>
    public int Nearest(double u, double v)
    {
        var cu = Cell(u);
        var cv = Cell(v);
        var best = -1;
        var bestDistance = double.PositiveInfinity;
        var width = 1.0 / _cells;
        for (var r = 0; r < _cells; r++)
        {
            for (var i = cu - r; i <= cu + r; i++)
            {
                if (i < 0 || i >= _cells)
                {
                    continue;
                }

                // On the ring only: the two rows at |dj| = r, and the two columns at |di| = r in between.
                var edge = i == cu - r || i == cu + r;
                for (var j = cv - r; j <= cv + r; j += edge ? 1 : Math.Max(1, 2 * r))
                {
                    if (j < 0 || j >= _cells)
                    {
                        continue;
                    }

                    var bucket = (i * _cells) + j;
                    for (var p = _bucketStart[bucket]; p < _bucketStart[bucket + 1]; p++)
                    {
                        var index = _bucketPoints[p];
                        var du = _u[index] - u;
                        var dv = _v[index] - v;
                        var distance = (du * du) + (dv * dv);
                        if (distance < bestDistance || (distance == bestDistance && index < best))
                        {
                            best = index;
                            bestDistance = distance;
                        }
                    }
                }
            }

            var reach = r * width;
            if (best >= 0 && bestDistance <= reach * reach)
            {
                break;
            }
        }

        return best;
    }

    private int Bucket(double u, double v) => (Cell(u) * _cells) + Cell(v);

    private int Cell(double coordinate) =>
        double.IsNaN(coordinate) ? 0 : (int)Math.Clamp(Math.Floor(coordinate * _cells), 0, _cells - 1);
}
