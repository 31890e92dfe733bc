using System.Globalization;
using System.Numerics;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Certification;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Atlas.Resolve;

/// <summary>
/// Answers point queries from an atlas by tracking only the real solutions of the nearest solved sample p* along the
/// real segment p* → p, then certifying each endpoint (approximate zero, distinct, real). The answer is accepted only
/// when every path ends regular and certified real, the count equals the classifier's label at p and the label of p*,
/// the nearest samples around p agree on that count, p is nearer to p* than half of p*'s distance to its nearest
/// stored crossing, and no stored crossing of the locus lies between p* and p. Otherwise the next nearest samples are
/// tried, then the parameter homotopy from the start fiber solves in full. What the fast path cannot see: a pair of
/// complex solutions turning real between p* and p (real-only tracking never carries them); the label, unanimity and
/// crossing checks guard against it only as far as the atlas has sampled that part of the locus.
/// </summary>
public sealed class Resolver
{
    private readonly AtlasSnapshot _snapshot;
    private readonly FiberSolver _solver;
    private readonly StartFiber _start;
    private readonly RegionClassifier _classifier;
    private readonly SampleSet _samples;
    private readonly NearestNeighbourClassifier _nearest;
    private readonly ResolveOptions _options;
    private readonly double[] _crossingPoints;
    private readonly double[][] _crossingNormals;
    private readonly KdTree? _crossingTree;

    public Resolver(AtlasSnapshot snapshot, FiberSolver solver, StartFiber start, RegionClassifier? classifier = null, ResolveOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(snapshot);
        ArgumentNullException.ThrowIfNull(solver);
        ArgumentNullException.ThrowIfNull(start);
        _snapshot = snapshot;
        _solver = solver;
        _start = start;
        _options = options ?? ResolveOptions.Default;
        _samples = SampleSet.From(snapshot);
        _nearest = new NearestNeighbourClassifier(_samples, 1);
        _classifier = classifier ?? _nearest;
        var withNormals = snapshot.Crossings.Where(c => c.Crossing.Normal.Count == _samples.Dimension).Select(c => c.Crossing).ToArray();
        _crossingPoints = new double[withNormals.Length * _samples.Dimension];
        _crossingNormals = new double[withNormals.Length][];
        for (var i = 0; i < withNormals.Length; i++)
        {
            _samples.Normalize([.. withNormals[i].Point], _crossingPoints.AsSpan(i * _samples.Dimension, _samples.Dimension));
            _crossingNormals[i] = [.. withNormals[i].Normal];
        }

        _crossingTree = withNormals.Length > 0 ? new KdTree(_crossingPoints, _samples.Dimension) : null;
    }

    /// <summary>
    /// Queries track over short distances (the nearest sample is close): a first step of half the segment and no cap
    /// on the step let most paths finish in one or two steps; the corrector's contraction bound still guards each step.
    /// </summary>
    private static readonly Solving.Tracking.TrackerOptions ShortSegment =
        Solving.Tracking.TrackerOptions.Default with { InitialStepSize = 0.5, MaxStepSize = 1.0 };

    /// <summary>The samples queries start from.</summary>
    public SampleSet Samples => _samples;

    /// <summary>The classifier that predicts labels.</summary>
    public RegionClassifier Classifier => _classifier;

    /// <summary>Answers one query. Thread-safe.</summary>
    public ResolveAnswer Ask(ReadOnlySpan<double> point)
    {
        var dimension = _samples.Dimension;
        if (point.Length != dimension)
        {
            throw new ArgumentException($"the point has {point.Length} values, the family {dimension} parameters", nameof(point));
        }

        var normalized = new double[dimension];
        _samples.Normalize(point, normalized);
        var outside = false;
        for (var k = 0; k < dimension; k++)
        {
            outside |= normalized[k] < 0 || normalized[k] > 1;
        }

        var predicted = _classifier.Classify(normalized);
        var target = ToComplex(point);
        if (outside)
        {
            return Full(target, predicted, outside: true, [], 0);
        }

        var neighbourhood = Math.Clamp(Math.Max(_options.Attempts, _options.Unanimity), 1, 64);
        Span<int> candidates = stackalloc int[neighbourhood];
        Span<double> distances = stackalloc double[neighbourhood];
        var found = _nearest.Nearest(normalized, candidates, distances);
        var rejections = new List<string>();
        var paths = 0;
        var agreeing = Math.Min(found, _options.Unanimity);
        for (var i = 0; i < agreeing; i++)
        {
            if (_samples.Labels[candidates[i]] != predicted)
            {
                rejections.Add(string.Create(
                    CultureInfo.InvariantCulture,
                    $"the {agreeing} nearest samples do not agree on {predicted} real solutions (one has {_samples.Labels[candidates[i]]}): the point is near the locus"));
                return Full(target, predicted, outside: false, rejections, 0);
            }
        }

        for (var attempt = 0; attempt < Math.Min(found, _options.Attempts); attempt++)
        {
            var index = candidates[attempt];
            var sample = _samples.Samples[index];
            var name = SampleName(index);
            if (sample.Label != predicted)
            {
                rejections.Add($"{name}: its {sample.Label} real solutions differ from the predicted label {predicted}");
                continue;
            }

            var start = _samples.Points.AsSpan(index * dimension, dimension);
            var clearance = NearestCrossingDistance(start);
            if (Math.Sqrt(distances[attempt]) > _options.CrossingMargin * clearance)
            {
                rejections.Add(string.Create(
                    CultureInfo.InvariantCulture,
                    $"{name}: the point is {Math.Sqrt(distances[attempt]):G3} away, more than {_options.CrossingMargin} of its distance {clearance:G3} to the nearest stored crossing"));
                continue;
            }

            if (CrossingBetween(start, normalized) is { } crossing)
            {
                rejections.Add($"{name}: a stored crossing lies between it and the point ({crossing})");
                continue;
            }

            var solutions = Solutions(sample);
            paths += solutions.Count;
            var tracked = _solver.TrackSegment(ToComplex([.. sample.Point]), target, solutions, ShortSegment);
            if (!tracked.AllRegular)
            {
                var failure = tracked.Paths.First(p => p.Status != PathStatus.Regular).Failure;
                rejections.Add($"{name}: real-only tracking failed ({failure.Name()})");
                continue;
            }

            var certified = _solver.Certify(target, [.. tracked.Paths.Select((p, i) => (i, p.Endpoint!))]);
            if (!certified.All(c => c.Certified && c.Certificate.Reality == Reality.Real))
            {
                rejections.Add($"{name}: an endpoint is not a certified, distinct, real solution");
                continue;
            }

            var answer = new ResolveAnswer
            {
                Method = "real-track",
                RealCount = certified.Count,
                Certified = true,
                AtlasVersion = _snapshot.Version.Version,
                Solutions = certified,
                PredictedLabel = predicted,
                StartSample = name,
                Rejections = rejections,
                PathsTracked = paths,
            };
            return _options.VerifyFull ? Verify(answer, target) : answer;
        }

        return Full(target, predicted, outside: false, rejections, paths);
    }

    /// <summary>The full solve: the parameter homotopy from the start fiber, all N paths, certified.</summary>
    public FiberSolution SolveFull(ReadOnlySpan<double> point) => _solver.Solve(_start, ToComplex(point));

    private ResolveAnswer Full(Complex[] target, int predicted, bool outside, List<string> rejections, int paths)
    {
        var solution = _solver.Solve(_start, target);
        return new ResolveAnswer
        {
            Method = "full",
            RealCount = solution.RealCount,
            Certified = solution.RealCountCertified,
            AtlasVersion = _snapshot.Version.Version,
            Solutions = [.. solution.RealSolutions],
            PredictedLabel = predicted,
            OutsideBox = outside,
            Rejections = rejections,
            PathsTracked = paths + solution.PathsTracked,
        };
    }

    private ResolveAnswer Verify(ResolveAnswer fast, Complex[] target)
    {
        var full = _solver.Solve(_start, target);
        var real = full.RealSolutions.ToArray();
        var agrees = real.Length == fast.RealCount
            && fast.Solutions.All(s => real.Any(r => Distance(r.Values, s.Values) <= 1e-8 * (1 + Norm(r.Values))));
        return fast with { Verified = agrees, PathsTracked = fast.PathsTracked + full.PathsTracked };
    }

    /// <summary>
    /// A stored crossing near the segment a → b whose tangent plane separates a from b, described for people, or null.
    /// Crossings are looked up around the segment's midpoint, within half its length plus the reach.
    /// </summary>
    private string? CrossingBetween(ReadOnlySpan<double> a, ReadOnlySpan<double> b)
    {
        if (_crossingTree is null)
        {
            return null;
        }

        var dimension = a.Length;
        Span<double> middle = stackalloc double[dimension];
        var length = 0.0;
        for (var k = 0; k < dimension; k++)
        {
            middle[k] = 0.5 * (a[k] + b[k]);
            length += (b[k] - a[k]) * (b[k] - a[k]);
        }

        var radius = (0.5 * Math.Sqrt(length)) + _options.CrossingReach;
        Span<int> near = stackalloc int[16];
        Span<double> squared = stackalloc double[16];
        var count = _crossingTree.Nearest(middle, near, squared);
        for (var i = 0; i < count; i++)
        {
            if (squared[i] > radius * radius)
            {
                break;
            }

            var c = near[i];
            var point = _crossingPoints.AsSpan(c * dimension, dimension);
            var normal = _crossingNormals[c];
            double sideA = 0, sideB = 0;
            for (var k = 0; k < dimension; k++)
            {
                sideA += normal[k] * (a[k] - point[k]);
                sideB += normal[k] * (b[k] - point[k]);
            }

            if (sideA * sideB < 0 && DistanceToSegment(point, a, b) <= _options.CrossingReach)
            {
                return string.Create(CultureInfo.InvariantCulture, $"at distance {Math.Sqrt(squared[i]):G3} from the segment's middle");
            }
        }

        return null;
    }

    /// <summary>Distance (box-normalized) from a point to the nearest stored crossing; ∞ without crossings.</summary>
    private double NearestCrossingDistance(ReadOnlySpan<double> point) =>
        _crossingTree is null ? double.PositiveInfinity : Math.Sqrt(_crossingTree.Nearest(point).SquaredDistance);

    private static double DistanceToSegment(ReadOnlySpan<double> point, ReadOnlySpan<double> a, ReadOnlySpan<double> b)
    {
        double along = 0, length = 0;
        for (var k = 0; k < point.Length; k++)
        {
            along += (point[k] - a[k]) * (b[k] - a[k]);
            length += (b[k] - a[k]) * (b[k] - a[k]);
        }

        var t = length == 0 ? 0 : Math.Clamp(along / length, 0, 1);
        var squared = 0.0;
        for (var k = 0; k < point.Length; k++)
        {
            var d = point[k] - (a[k] + (t * (b[k] - a[k])));
            squared += d * d;
        }

        return Math.Sqrt(squared);
    }

    private List<Complex[]> Solutions(Sample sample)
    {
        var n = _solver.System.UnknownCount;
        var solutions = new List<Complex[]>(sample.Label);
        for (var r = 0; r < sample.Solutions.Count / n; r++)
        {
            var x = new Complex[n];
            for (var i = 0; i < n; i++)
            {
                x[i] = sample.Solutions[(r * n) + i];
            }

            solutions.Add(x);
        }

        return solutions;
    }

    private string SampleName(int index) =>
        string.Create(CultureInfo.InvariantCulture, $"{AtlasContent.KindName(_samples.Samples[index].Kind)} sample {index} in tile {_samples.Tiles[index]}");

    private static Complex[] ToComplex(ReadOnlySpan<double> values)
    {
        var result = new Complex[values.Length];
        for (var k = 0; k < values.Length; k++)
        {
            result[k] = values[k];
        }

        return result;
    }

    private static double Distance(Complex[] a, Complex[] b)
    {
        var d = 0.0;
        for (var i = 0; i < a.Length; i++)
        {
            d = Math.Max(d, (a[i] - b[i]).Magnitude);
        }

        return d;
    }

    private static double Norm(Complex[] a) => a.Length == 0 ? 0 : a.Max(v => v.Magnitude);
}
