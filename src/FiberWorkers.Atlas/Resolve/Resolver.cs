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
/// Answers point queries from an atlas by tracking only real solutions from nearby solved samples along the real
/// segment to the query, then certifying each endpoint (approximate zero, distinct, real). Certified distinct real
/// endpoints bound the query's count from below, so the start samples are the nearest ones holding the highest count
/// among the query's neighbourhood and the classifier's label: from a sample in the query's own region every path
/// arrives; from one across a fold a pair of paths meets there and fails. An answer is accepted when every path ends
/// regular and certified real and no stored crossing's tangent plane separates the sample from the query near the
/// segment; where the whole neighbourhood agrees, the query must also lie within a margin of the sample's distance to
/// the nearest stored crossing. A count above the classifier's label is accepted this way (the certified solutions
/// prove the label low). When a pair of paths meets a fold, the same sample's real solutions are tracked again around
/// it through complex parameters and what arrives certified real is accepted once a neighbour holding that count
/// reaches the same solutions from its own side (<see cref="ResolveOptions.TwoSided"/>). Otherwise a few more samples
/// are tried, then the parameter homotopy solves in full, all N paths, from the relay fiber of the query's cell (see
/// <see cref="ResolveOptions.RelayDivisions"/>) or the family's start fiber. What the fast path cannot see: a pair
/// of complex solutions of the start sample turning real between it and the query (neither real-only tracking nor the
/// detour carries them); the neighbourhood, crossing and margin checks guard against it only as far as the atlas has
/// sampled that part of the locus.
/// </summary>
public sealed class Resolver
{
    /// <summary>What a full answer from the family's start fiber names as its start.</summary>
    private const string StartFiberName = "family's start fiber";

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
    private readonly double[] _detour;
    private readonly double[] _clearance;
    private readonly int _relayDivisions;
    private readonly FiberSolver _relaySolver;
    private readonly Lazy<StartFiber?>[] _relays;

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
        _clearance = new double[_crossingTree is null ? 0 : _samples.Samples.Count];
        Array.Fill(_clearance, double.NaN);

        // The imaginary direction of detours around folds: fixed, so answers do not depend on the order of queries.
        var random = new Solving.Randomness.SeededRandom(0x5eed_f01d);
        _detour = new double[_samples.Dimension];
        var norm = 0.0;
        for (var k = 0; k < _detour.Length; k++)
        {
            _detour[k] = random.NextGaussian();
            norm += _detour[k] * _detour[k];
        }

        for (var k = 0; k < _detour.Length; k++)
        {
            _detour[k] /= Math.Sqrt(norm);
        }

        _relaySolver = new FiberSolver(solver.System, solver.Options with { Tracker = Detour });
        _relayDivisions = RelayDivisions(_options.RelayDivisions, _samples.Dimension);
        var cells = _relayDivisions == 0 ? 0 : (int)Math.Pow(_relayDivisions, _samples.Dimension);
        _relays = new Lazy<StartFiber?>[cells];
        for (var c = 0; c < cells; c++)
        {
            var cell = c;
            _relays[c] = new Lazy<StartFiber?>(() => Relay(cell), LazyThreadSafetyMode.ExecutionAndPublication);
        }
    }

    /// <summary>
    /// Queries track over short distances (the nearest sample is close): a first step over the whole segment and no cap
    /// on the step let most paths finish in one step; the corrector's contraction bound still guards each step. A path
    /// that needs steps below 1e-4 of the segment, or more than 50 of them, is running into a fold and stops early; the
    /// detour around the fold then decides. Every end is certified, so the ends' condition is judged from the
    /// certificates (<see cref="FiberSolver.EndConditionLimit"/>) rather than estimated by the track.
    /// </summary>
    private static readonly Solving.Tracking.TrackerOptions ShortSegment =
        Solving.Tracking.TrackerOptions.Default with { InitialStepSize = 1.0, MaxStepSize = 1.0, MinStepSize = 1e-4, MaxSteps = 50, EndNewtonSteps = 1, EstimateEndCondition = false };

    /// <summary>
    /// The two legs of a detour around a fold: complex paths, no fold on them, a first step over the whole leg, and a
    /// predictor tolerance ten times the default's. Each end is refined and certified, and the ends must be distinct,
    /// so a path that jumps can only cost the answer (a rejection or a mismatch with the other side), never make a
    /// wrong one: whatever set of certified distinct real zeros is accepted holds the count the checks require.
    /// </summary>
    private static readonly Solving.Tracking.TrackerOptions Detour =
        Solving.Tracking.TrackerOptions.Default with { InitialStepSize = 1.0, MaxStepSize = 1.0, PredictorTolerance = 1e-3, EndNewtonSteps = 1 };

    /// <summary>
    /// The second leg of a detour: its ends are certified at once, so their condition is judged from the certificates
    /// (<see cref="FiberSolver.EndConditionLimit"/>) rather than estimated by the track.
    /// </summary>
    private static readonly Solving.Tracking.TrackerOptions DetourHome = Detour with { EstimateEndCondition = false };

    /// <summary>
    /// The straight segment from a relay fiber to a query in its cell: complex, short, a first step over all of it; a
    /// path that needs more than 200 steps is heading for a singularity or infinity, and the projective solve with its
    /// endgame takes over.
    /// </summary>
    private static readonly Solving.Tracking.TrackerOptions RelaySegment = DetourHome with { MaxSteps = 200 };

    /// <summary>The samples queries start from.</summary>
    public SampleSet Samples => _samples;

    /// <summary>The classifier that predicts labels.</summary>
    public RegionClassifier Classifier => _classifier;

    /// <summary>
    /// Computes every relay fiber now instead of on first use (a full solve from the family's start fiber per cell;
    /// cells whose solve is incomplete stay empty and their points solve from the start fiber). For hosts that answer
    /// many queries and would rather pay this once at start-up than on the first fallback in each cell. Thread-safe.
    /// Returns the number of cells with a relay fiber.
    /// </summary>
    public int PrepareRelays()
    {
        var ready = 0;
        foreach (var relay in _relays)
        {
            ready += relay.Value is null ? 0 : 1;
        }

        return ready;
    }

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

        var target = ToComplex(point);
        if (outside)
        {
            return Full(target, _classifier.Classify(normalized), outside: true, [], 0);
        }

        var neighbourhood = Math.Clamp(Math.Max(_options.Attempts, _options.Neighbourhood), 1, 64);
        Span<int> candidates = stackalloc int[neighbourhood];
        Span<double> distances = stackalloc double[neighbourhood];
        var found = _nearest.Nearest(normalized, candidates, distances);

        // The 1-NN classifier's label is the nearest neighbour's, already at hand.
        var predicted = ReferenceEquals(_classifier, _nearest) && found > 0 ? _samples.Labels[candidates[0]] : _classifier.Classify(normalized);
        var rejections = new List<string>();
        var paths = 0;

        // Stage 1: the most real solutions around p. Certified distinct real endpoints are a lower bound on p's count,
        // so the highest count among the neighbours (and the classifier's) is tried first: a start sample in p's own
        // region then reaches the true count, and one across a fold loses a pair there and fails instead.
        var most = predicted;
        var fewest = predicted;
        for (var i = 0; i < found; i++)
        {
            most = Math.Max(most, _samples.Labels[candidates[i]]);
            fewest = Math.Min(fewest, _samples.Labels[candidates[i]]);
        }

        // Around a mixed neighbourhood the atlas has sampled the locus, and the stored crossings between a start sample
        // and p are checked; where every neighbour agrees, p may still lie across a part of the locus the atlas never
        // met, so the count is carried only over a short distance compared with the known locus.
        var unanimous = most == fewest;

        // Stage 2, when a fold shows: p may lie on the side with fewer real solutions. The start sample that lost a
        // pair to the fold has all its real solutions tracked again around it, through complex parameters, so none
        // meets the fold: at p each arrives real or non-real (certified either way), and a pair that turned complex
        // and real again on the way is seen. The real ones must then be reached, the same, by real-only tracking from
        // a neighbour holding that count on p's side. Both tracks rest on what the first stage rests on: the start
        // samples' non-real solutions stay non-real over the short way to p.
        var tries = 0;
        int[]? nearest = null;
        Span<int> detoured = stackalloc int[Math.Clamp(_options.Attempts, 1, 64)];
        var detours = 0;
        for (var i = 0; i < found && tries < _options.Attempts; i++)
        {
            var index = candidates[i];
            if (_samples.Labels[index] != most)
            {
                continue;
            }

            // The margin needs no tracking: samples too far for it are passed over without using up an attempt.
            if (unanimous && Reach(index, normalized) is { } far)
            {
                rejections.Add($"{SampleName(index)}: {far}");
                continue;
            }

            tries++;
            var outcome = Track(index, normalized, target, rejections, ref paths);
            if (outcome.Accepted)
            {
                return Accept(outcome.Solutions, index, predicted, rejections, paths, target);
            }

            if (outcome.Lost is null)
            {
                continue;
            }

            // Across a stored crossing nothing was tracked yet, and any neighbour with the count may go around the
            // fold: the one farthest from the stored locus, whose solutions about to meet there are still apart.
            // Each goes around once: a later attempt across a crossing takes the next clearest.
            if (outcome.AcrossCrossing)
            {
                index = Clearest(candidates[..found], most, index, detoured[..detours]);
                if (detoured[..detours].Contains(index))
                {
                    continue;
                }
            }

            if (detours < detoured.Length)
            {
                detoured[detours++] = index;
            }

            // Across a stored crossing, the pair the fold takes goes around first, alone: when it arrives non-real, a
            // neighbour with two fewer on p's side answers; otherwise its ends are kept and the others go around too.
            var lost = outcome.Lost.Solutions;
            if (outcome.AcrossCrossing && _options.TwoSided)
            {
                nearest ??= candidates[..found].ToArray();
                var pair = PairAround(index, OtherSideOrder(nearest, normalized), normalized, target, rejections, ref paths);
                if (pair.Answer is { } fewer)
                {
                    if (HeldNearby(fewer.Solutions.Count, candidates[..found], rejections))
                    {
                        return Accept(fewer.Solutions, fewer.Index, predicted, rejections, paths, target);
                    }

                    break;
                }

                if (pair.Ends is not { } ends)
                {
                    continue;
                }

                lost = ends;
            }

            if (_options.TwoSided && AroundFold(index, lost, target, rejections, ref paths) is { } real)
            {
                // All arriving real proves the highest count, unless a stored crossing lies in between: there a pair of
                // the sample's non-real solutions may have turned real too, which no track from it can see.
                if (real.Count == most && !outcome.AcrossCrossing)
                {
                    return Accept(real, index, predicted, rejections, paths, target);
                }

                nearest ??= candidates[..found].ToArray();
                if (OtherSide(new Survivors(index, real), OtherSideOrder(nearest, normalized), normalized, target, rejections, ref paths) is { } other)
                {
                    if (HeldNearby(other.Solutions.Count, candidates[..found], rejections))
                    {
                        return Accept(other.Solutions, other.Index, predicted, rejections, paths, target);
                    }

                    break;
                }
            }

            // A fold lies between that sample and p: the others with the most solutions would mostly cross it too.
            // Across a stored crossing alone another sample may still lie on p's side of it.
            if (!outcome.AcrossCrossing)
            {
                break;
            }
        }

        return Full(target, predicted, outside: false, rejections, paths);
    }

    /// <summary>
    /// Tracks real solutions of a start sample to the query along two straight segments through the segment's midpoint
    /// moved off the real plane by half the segment's length (box-normalized), so that no path meets a real fold.
    /// Solutions whose paths already arrived certified (<paramref name="arrived"/>: real-only tracks, or a pair taken
    /// around before) keep those ends and only the others take the detour (on the four-bus microgrid a fold takes one
    /// pair, so two paths instead of all); when none arrived, or one arrived uncertified, every real solution takes it.
    /// Returns the endpoints certified real when every detoured path arrives and every endpoint, old and new together,
    /// is a certified, distinct zero whose reality is decided; else null, with the reason among the rejections. Both ways rest on the same premise as the
    /// real-only track (the sample's non-real solutions stay non-real over the short way); the arrived ends and the
    /// detoured ones are all certified solutions at the query, and certified distinct together.
    /// </summary>
    private IReadOnlyList<FiberPoint>? AroundFold(int index, IReadOnlyList<FiberPoint> arrived, Complex[] target, List<string> rejections, ref int paths)
    {
        var sample = _samples.Samples[index];
        var solutions = Solutions(sample);
        var keep = arrived.Count > 0 && arrived.All(c => c.Certified && c.Certificate.Reality is Reality.Real or Reality.NonReal) ? arrived : [];
        var detoured = new List<int>(solutions.Count);
        for (var r = 0; r < solutions.Count; r++)
        {
            if (!keep.Any(c => c.PathIndex == r))
            {
                detoured.Add(r);
            }
        }

        var around = Around(index, solutions, detoured, target, rejections, ref paths);
        if (around is null)
        {
            return null;
        }

        var ends = new List<(int PathIndex, Complex[] Values)>(solutions.Count);
        ends.AddRange(keep.Select(c => (c.PathIndex, c.Values)));
        ends.AddRange(around);
        var certified = _solver.Certify(target, ends);
        if (!certified.All(c => c.Certified && c.Condition <= _solver.EndConditionLimit))
        {
            rejections.Add($"{SampleName(index)}: an endpoint tracked around the fold is not certified or too ill-conditioned");
            return null;
        }

        return [.. certified.Where(c => c.Certificate.Reality == Reality.Real)];
    }

    /// <summary>
    /// The sample's solutions <paramref name="detoured"/> tracked to the query along two straight segments through the
    /// segment's midpoint moved off the real plane by half the segment's length (box-normalized): the ends, uncertified
    /// and their condition not yet judged (callers certify them and apply the limit), by solution index; null (with
    /// the reason among the rejections) when a path does not arrive.
    /// </summary>
    private List<(int PathIndex, Complex[] Values)>? Around(
        int index, List<Complex[]> solutions, List<int> detoured, Complex[] target, List<string> rejections, ref int paths)
    {
        var from = ToComplex([.. _samples.Samples[index].Point]);
        var dimension = from.Length;
        var length = 0.0;
        for (var k = 0; k < dimension; k++)
        {
            var step = (target[k].Real - from[k].Real) / _samples.Box[k].Width;
            length += step * step;
        }

        var middle = new Complex[dimension];
        for (var k = 0; k < dimension; k++)
        {
            middle[k] = new Complex(0.5 * (from[k].Real + target[k].Real), 0.5 * Math.Sqrt(length) * _detour[k] * _samples.Box[k].Width);
        }

        paths += 2 * detoured.Count;
        var first = _solver.TrackSegment(from, middle, [.. detoured.Select(r => solutions[r])], Detour);
        var second = first.AllRegular ? _solver.TrackSegment(middle, target, [.. first.Paths.Select(p => p.Endpoint!)], DetourHome) : null;
        if (second is null || !second.AllRegular)
        {
            rejections.Add($"{SampleName(index)}: tracking around the fold failed");
            return null;
        }

        return [.. second.Paths.Select(p => (detoured[p.Index], p.Endpoint!))];
    }

    /// <summary>
    /// Across a stored crossing: the sample's two closest real solutions — the pair a fold next to it takes — tracked
    /// around the fold alone. When both arrive certified and non-real, p holds at most two fewer real solutions than the
    /// sample (its other real ones are that many at most, and its non-real ones stay non-real over the short way, the
    /// premise of every answer here); the nearest neighbour on p's side holding two fewer, tracked real-only to p and
    /// accepted, then holds at least as many: that count, and its solutions, are the answer. Otherwise the pair's
    /// certified ends are returned for the detour of the others to keep (two pairs may have left at once, or the
    /// pair arrived real), or neither when a path of the pair failed (the reason among the rejections).
    /// </summary>
    private ((int Index, IReadOnlyList<FiberPoint> Solutions)? Answer, IReadOnlyList<FiberPoint>? Ends) PairAround(
        int index, IEnumerable<int> neighbours, ReadOnlySpan<double> normalized, Complex[] target, List<string> rejections, ref int paths)
    {
        var solutions = Solutions(_samples.Samples[index]);
        if (solutions.Count < 2)
        {
            return (null, []);
        }

        var (a, b) = ClosestPair(solutions);
        var ends = Around(index, solutions, [a, b], target, rejections, ref paths);
        var pair = ends is null ? null : _solver.Certify(target, ends);
        if (pair is null || !pair.All(c => c.Certified && c.Condition <= _solver.EndConditionLimit))
        {
            if (pair is not null)
            {
                rejections.Add($"{SampleName(index)}: an endpoint tracked around the fold is not certified or too ill-conditioned");
            }

            return (null, null);
        }

        if (!pair.All(c => c.Certificate.Reality == Reality.NonReal))
        {
            return (null, pair);
        }

        var fewer = solutions.Count - 2;
        foreach (var other in neighbours)
        {
            if (_samples.Labels[other] != fewer)
            {
                continue;
            }

            var outcome = Track(other, normalized, target, rejections, ref paths);
            if (outcome.Accepted)
            {
                return ((other, outcome.Solutions), null);
            }

            // A neighbour that a stored crossing separates from p was not tracked: the next one may lie on p's side.
            if (!outcome.AcrossCrossing)
            {
                return (null, pair);
            }
        }

        rejections.Add($"no neighbour on the point's side holds the {fewer} real solutions left when a pair from {SampleName(index)} turned non-real around the fold");
        return (null, pair);
    }

    /// <summary>The two solutions closest to each other, relative to their size (the first such pair on ties).</summary>
    private static (int A, int B) ClosestPair(List<Complex[]> solutions)
    {
        var best = (A: 0, B: 1);
        var closest = double.PositiveInfinity;
        for (var i = 0; i < solutions.Count; i++)
        {
            for (var j = i + 1; j < solutions.Count; j++)
            {
                var distance = Distance(solutions[i], solutions[j]) / (1 + Math.Max(Norm(solutions[i]), Norm(solutions[j])));
                if (distance < closest)
                {
                    (best, closest) = ((i, j), distance);
                }
            }
        }

        return best;
    }

    /// <summary>
    /// Neighbours searched for one on the query's side of a fold: more than <see cref="ResolveOptions.Neighbourhood"/>,
    /// because near the stored locus the nearest ones with the count there are often all across a stored crossing. A
    /// farther one is as safe: its certified real endpoints bound the count from below, and where it checks survivors
    /// it must reach the same points. On the four-bus microgrid, looking among 48, 96 and 160 instead of the twelve nearest
    /// took the full solves from 6.2 % of the queries to 5.9, 5.5 and 5.1 %. The wider search runs only when the nearest
    /// hold none (a 96-nearest search costs several times a 12-nearest one).
    /// </summary>
    private IEnumerable<int> OtherSideOrder(int[] nearest, double[] normalized)
    {
        foreach (var index in nearest)
        {
            yield return index;
        }

        var indices = new int[OtherSideNeighbourhood];
        var distances = new double[OtherSideNeighbourhood];
        var found = _nearest.Nearest(normalized, indices, distances);
        for (var i = 0; i < found; i++)
        {
            if (!nearest.Contains(indices[i]))
            {
                yield return indices[i];
            }
        }
    }

    /// <summary>Neighbours searched for the other side of a fold.</summary>
    private const int OtherSideNeighbourhood = 96;

    /// <summary>
    /// Among the neighbours holding <paramref name="count"/> and not in <paramref name="excluded"/>, the one farthest
    /// from its nearest stored crossing (the first such on ties; <paramref name="fallback"/> when none is clearer).
    /// </summary>
    private int Clearest(ReadOnlySpan<int> neighbours, int count, int fallback, ReadOnlySpan<int> excluded)
    {
        var best = fallback;
        var clearest = excluded.Contains(fallback) ? double.NegativeInfinity : Clearance(fallback);
        foreach (var index in neighbours)
        {
            if (_samples.Labels[index] == count && !excluded.Contains(index) && Clearance(index) > clearest)
            {
                (best, clearest) = (index, Clearance(index));
            }
        }

        return best;
    }

    /// <summary>
    /// The nearest neighbour on the query's side (no stored crossing between) holding exactly the survivors' count,
    /// tracked to the query: its certified solutions when they are the survivors', else null (with the reason among the
    /// rejections).
    /// </summary>
    private (int Index, IReadOnlyList<FiberPoint> Solutions)? OtherSide(
        Survivors survivors, IEnumerable<int> neighbours, ReadOnlySpan<double> normalized, Complex[] target, List<string> rejections, ref int paths)
    {
        var fewer = survivors.Solutions.Count;
        foreach (var index in neighbours)
        {
            if (_samples.Labels[index] != fewer)
            {
                continue;
            }

            var outcome = Track(index, normalized, target, rejections, ref paths);
            if (!outcome.Accepted)
            {
                // One that a stored crossing separates from p was not tracked: the next one may lie on p's side.
                if (outcome.AcrossCrossing)
                {
                    continue;
                }

                return null;
            }

            if (SameSolutions(outcome.Solutions, survivors.Solutions))
            {
                return (index, outcome.Solutions);
            }

            rejections.Add($"{SampleName(index)}: its {fewer} solutions differ from those that crossed the fold from {SampleName(survivors.Sample)}");
            return null;
        }

        rejections.Add($"no neighbour on the point's side holds the {fewer} solutions that survived the fold from {SampleName(survivors.Sample)}");
        return null;
    }

    /// <summary>What tracking from one start sample gave: accepted solutions, or the certified survivors of a fold.</summary>
    private readonly record struct Attempt(bool Accepted, IReadOnlyList<FiberPoint> Solutions, Survivors? Lost, bool AcrossCrossing = false);

    /// <summary>A start sample whose real-only track could not be accepted for a fold ahead (failed paths or a stored crossing).</summary>
    private sealed record Survivors(int Sample, IReadOnlyList<FiberPoint> Solutions);

    /// <summary>
    /// Tracks the real solutions of one start sample to the query and certifies the endpoints. Accepted when every path
    /// ends regular, every endpoint is a certified, distinct, real solution and no stored crossing separates the sample
    /// from the query. When paths fail — the mark of a fold on the segment, where pairs of real solutions meet and leave
    /// the real plane — or a stored crossing separates the two, the attempt says so, and the detour around the fold
    /// decides.
    /// </summary>
    private Attempt Track(int index, ReadOnlySpan<double> normalized, Complex[] target, List<string> rejections, ref int paths)
    {
        var dimension = _samples.Dimension;
        var sample = _samples.Samples[index];
        var name = SampleName(index);
        var separated = CrossingBetween(_samples.Points.AsSpan(index * dimension, dimension), normalized);
        if (separated is not null && _options.TwoSided)
        {
            // Real-only tracking could not be accepted across the crossing: go around the fold at once.
            rejections.Add($"{name}: a stored crossing lies between it and the point ({separated})");
            return new Attempt(false, [], new Survivors(index, []), AcrossCrossing: true);
        }

        var solutions = Solutions(sample);
        paths += solutions.Count;
        var tracked = _solver.TrackSegment(ToComplex([.. sample.Point]), target, solutions, ShortSegment);
        var ends = tracked.Paths.Where(p => p.Status == PathStatus.Regular).ToArray();
        var checkedEnds = _solver.Certify(target, [.. ends.Select(p => (p.Index, p.Endpoint!))]);

        // An end too ill-conditioned to tell from one on a fold counts as a failed path (step-size underflow's kin).
        var limit = _solver.EndConditionLimit;
        var certified = checkedEnds.All(c => c.Condition <= limit) ? checkedEnds : [.. checkedEnds.Where(c => c.Condition <= limit)];
        var arrived = ends.Where((p, i) => checkedEnds[i].Condition <= limit).ToArray();
        var allCertified = certified.All(c => c.Certified && c.Certificate.Reality == Reality.Real);
        if (arrived.Length == tracked.Paths.Count)
        {
            if (allCertified && separated is null)
            {
                return new Attempt(true, certified, null);
            }

            if (separated is not null)
            {
                rejections.Add($"{name}: a stored crossing lies between it and the point ({separated})");
                return default;
            }

            rejections.Add($"{name}: an endpoint is not a certified, distinct, real solution");
            return default;
        }

        var failed = tracked.Paths.Count - arrived.Length;
        var failure = tracked.Paths.FirstOrDefault(p => p.Status != PathStatus.Regular)?.Failure ?? PathFailure.IllConditionedEnd;
        rejections.Add(string.Create(CultureInfo.InvariantCulture, $"{name}: real-only tracking failed on {failed} of {tracked.Paths.Count} paths ({failure.Name()})"));
        return new Attempt(false, certified, new Survivors(index, certified));
    }

    /// <summary>
    /// An answer across a fold, from a neighbour on the query's side with fewer real solutions, rests on the premise
    /// that the non-real solutions stay non-real over the short way; where that count is held by none of the query's
    /// nearest samples, the neighbour that supplied it lies beyond them (found by the wider search), and an unstored
    /// part of the locus between it and the query would go unseen. The four-bus microgrid's atlas showed one such
    /// answer in 2,000 points: 2 real solutions, from a sample four times as far as the nearest ones, where the 12
    /// nearest held 4 and 6 and the point has 4, next to the tile whose sweep flagged a missing crossing.
    /// </summary>
    private bool HeldNearby(int count, ReadOnlySpan<int> nearest, List<string> rejections)
    {
        foreach (var index in nearest)
        {
            if (_samples.Labels[index] == count)
            {
                return true;
            }
        }

        rejections.Add(string.Create(CultureInfo.InvariantCulture, $"the count {count} found across the fold is held by none of the {nearest.Length} nearest samples"));
        return false;
    }

    private ResolveAnswer Accept(IReadOnlyList<FiberPoint> solutions, int index, int predicted, List<string> rejections, int paths, Complex[] target)
    {
        var answer = new ResolveAnswer
        {
            Method = "real-track",
            RealCount = solutions.Count,
            Certified = true,
            AtlasVersion = _snapshot.Version.Version,
            Solutions = solutions,
            PredictedLabel = predicted,
            StartSample = SampleName(index),
            Rejections = rejections,
            PathsTracked = paths,
        };
        return _options.VerifyFull ? Verify(answer, target) : answer;
    }

    /// <summary>True when both lists hold the same points (each of one within 1e-8, relative, of one of the other).</summary>
    private static bool SameSolutions(IReadOnlyList<FiberPoint> a, IReadOnlyList<FiberPoint> b) =>
        a.Count == b.Count
        && a.All(x => b.Any(y => Distance(x.Values, y.Values) <= 1e-8 * (1 + Norm(x.Values))))
        && b.All(y => a.Any(x => Distance(x.Values, y.Values) <= 1e-8 * (1 + Norm(y.Values))));

    /// <summary>The full solve: the parameter homotopy from the start fiber, all N paths, certified.</summary>
    public FiberSolution SolveFull(ReadOnlySpan<double> point) => _solver.Solve(_start, ToComplex(point));

    private ResolveAnswer Full(Complex[] target, int predicted, bool outside, List<string> rejections, int paths)
    {
        var (solution, from) = outside ? (_solver.Solve(_start, target), StartFiberName) : SolveNear(target, ref paths);
        return new ResolveAnswer
        {
            Method = "full",
            StartSample = from,
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

    /// <summary>
    /// The full solve of a point inside the box from the relay fiber of its cell: the same parameter homotopy with all N
    /// paths, from a start fiber nearer than the family's, first along the straight segment in affine coordinates (no
    /// endgame; accepted when all N ends are certified distinct zeros, which makes the fiber complete), then in the
    /// projective chart with the endgame. When the relay is not complete, or a path from it does not arrive either way,
    /// the family's start fiber solves instead (the paths tried are counted).
    /// </summary>
    private (FiberSolution Solution, string From) SolveNear(Complex[] target, ref int paths)
    {
        var cell = _relays.Length > 0 ? Cell(target) : -1;
        if (cell >= 0 && _relays[cell].Value is { } relay)
        {
            var name = string.Create(CultureInfo.InvariantCulture, $"relay fiber of cell {cell + 1} of {_relays.Length}");
            var direct = _solver.SolveAlongSegment(relay, target, RelaySegment);
            if (direct.Paths.All(p => p.Status == PathStatus.Regular) && direct.RootCount == relay.RootCount && direct.Solutions.All(s => s.Certified))
            {
                return (direct, name);
            }

            paths += direct.PathsTracked;
            var near = _relaySolver.Solve(relay, target);
            if (near.Paths.All(p => p.Status == PathStatus.Regular) && near.RootCount == relay.RootCount)
            {
                return (near, name);
            }

            paths += near.PathsTracked;
        }

        return (_solver.Solve(_start, target), StartFiberName);
    }

    /// <summary>The relay cell holding a point of the box (row-major over the box-normalized grid).</summary>
    private int Cell(Complex[] point)
    {
        var cell = 0;
        for (var k = 0; k < point.Length; k++)
        {
            var box = _samples.Box[k];
            var along = (int)Math.Floor((point[k].Real - box.Low) / box.Width * _relayDivisions);
            cell = (cell * _relayDivisions) + Math.Clamp(along, 0, _relayDivisions - 1);
        }

        return cell;
    }

    /// <summary>
    /// The fiber over a cell's relay point: its centre moved off the real plane by up to half the cell's width in each
    /// parameter (a fixed pseudo-random direction per cell, so answers do not depend on the order of queries), reached
    /// from the family's start fiber. Null when that solve does not find all N solutions regular.
    /// </summary>
    private StartFiber? Relay(int cell)
    {
        var dimension = _samples.Dimension;
        var random = new Solving.Randomness.SeededRandom(Solving.Randomness.SeededRandom.Derive(0x5eed_ce11, (ulong)cell));
        var point = new Complex[dimension];
        var rest = cell;
        for (var k = dimension - 1; k >= 0; k--)
        {
            var box = _samples.Box[k];
            var width = box.Width / _relayDivisions;
            var index = rest % _relayDivisions;
            rest /= _relayDivisions;
            point[k] = new Complex(box.Low + ((index + 0.5) * width), 0.5 * width * random.NextDouble(-1, 1));
        }

        var solution = _solver.Solve(_start, point);
        if (!solution.Paths.All(p => p.Status == PathStatus.Regular) || solution.RootCount != _start.RootCount)
        {
            return null;
        }

        return new StartFiber(_start.FamilyHash, _start.Unknowns, point, [.. solution.Solutions.Select(s => s.Values)], _start.Provenance);
    }

    /// <summary>Relay cells per axis: the option, lowered until there are at most 4,096 cells.</summary>
    private static int RelayDivisions(int wanted, int dimension)
    {
        var divisions = Math.Max(wanted, 0);
        while (divisions > 1 && Math.Pow(divisions, dimension) > 4096)
        {
            divisions--;
        }

        return divisions;
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
        var count = _crossingTree.Nearest(middle, near, squared, radius * radius);
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

    /// <summary>
    /// Why the query is too far from a start sample to trust a count carried from it, or null: farther than
    /// <see cref="ResolveOptions.CrossingMargin"/> of the sample's distance to the nearest stored crossing, where a
    /// part of the locus the atlas has not sampled may lie in between.
    /// </summary>
    private string? Reach(int index, ReadOnlySpan<double> normalized)
    {
        if (_crossingTree is null)
        {
            return null;
        }

        var start = _samples.Points.AsSpan(index * _samples.Dimension, _samples.Dimension);
        var distance = 0.0;
        for (var k = 0; k < start.Length; k++)
        {
            distance += (normalized[k] - start[k]) * (normalized[k] - start[k]);
        }

        distance = Math.Sqrt(distance);

        var clearance = Clearance(index);
        return distance <= _options.CrossingMargin * clearance
            ? null
            : string.Create(CultureInfo.InvariantCulture, $"the point is {distance:G3} away, more than {_options.CrossingMargin} of its distance {clearance:G3} to the nearest stored crossing");
    }

    /// <summary>
    /// A sample's distance (box-normalized) to its nearest stored crossing, +∞ without crossings. It never changes:
    /// computed on first use and kept (a race only computes it twice).
    /// </summary>
    private double Clearance(int index)
    {
        if (_crossingTree is null)
        {
            return double.PositiveInfinity;
        }

        var clearance = Volatile.Read(ref _clearance[index]);
        if (double.IsNaN(clearance))
        {
            clearance = Math.Sqrt(_crossingTree.Nearest(_samples.Points.AsSpan(index * _samples.Dimension, _samples.Dimension)).SquaredDistance);
            Volatile.Write(ref _clearance[index], clearance);
        }

        return clearance;
    }

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
