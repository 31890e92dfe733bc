using System.Globalization;
using System.Numerics;
using FiberWorkers.Atlas.Crossings;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Atlas.Sampling;

/// <summary>
/// Boundary-aware sampling on one line: the real count is constant between consecutive real crossings, so each
/// interval's midpoint is solved in full and labels the points near its ends (crossing ± δ) and the line's
/// uniform point; those get their real solutions by real-only tracking from the midpoint, which stays inside the
/// interval. δ is measured perpendicular to the locus where its normal is known (at finite folds, from the left null
/// vector of ∂F/∂x): a line that grazes the locus would otherwise put "near-boundary" points far closer to it than δ,
/// where no classifier can tell the sides apart from neighbours. The offset along the line is δ/cos φ (φ the angle
/// between line and normal), at most a quarter of the neighbouring interval. Where that quarter cannot hold a point
/// at least δ/2 from the crossing (two crossings close together on a line that nearly touches the locus), or where
/// the line grazes the locus (|cos φ| &lt; 0.05), no near-boundary point is placed on that side: it would sit far
/// closer than δ, and the interval's midpoint labels the interval anyway. Passages through infinity split intervals (real-only tracking in affine coordinates cannot cross
/// them) but are not boundaries: the count must agree on both sides. Counts that change by an odd number across a
/// fold, by anything but two across a single fold, or at all across a passage, are flagged and kept.
/// </summary>
internal sealed class LineSampler
{
    private readonly FiberSolver _solver;
    private readonly StartFiber _start;
    private readonly int _unknowns;

    /// <param name="solver">The family's solver.</param>
    /// <param name="start">The family's start fiber.</param>
    /// <param name="widths">The box's widths, for δ perpendicular to the locus; null keeps δ along the line.</param>
    public LineSampler(FiberSolver solver, StartFiber start, double[]? widths = null)
    {
        _solver = solver;
        _start = start;
        _unknowns = solver.System.UnknownCount;
        _widths = widths;
    }

    private readonly double[]? _widths;

    /// <summary>Samples of the line; adds flags for inconsistencies. <paramref name="delta"/> is in s units.</summary>
    public List<Sample> Sample(
        int lineIndex, double[] origin, double[] direction, double sMin, double sMax, IReadOnlyList<LineCrossing> crossings, double delta, List<string> flags)
    {
        // Crossings at the same s (symmetric families fold in pairs) make one cut: a zero-length interval would put a
        // midpoint on the discriminant itself.
        var tolerance = CrossingFinder.CoincidenceTolerance * (sMax - sMin);
        var groups = new List<List<LineCrossing>>();
        var atEnds = new List<LineCrossing>();
        foreach (var crossing in crossings)
        {
            // A crossing on the segment's end (a tile edge) bounds no interval here.
            if (crossing.S - sMin <= tolerance || sMax - crossing.S <= tolerance)
            {
                atEnds.Add(crossing);
                continue;
            }

            if (groups.Count > 0 && crossing.S - groups[^1][^1].S <= tolerance)
            {
                groups[^1].Add(crossing);
            }
            else
            {
                groups.Add([crossing]);
            }
        }

        var bounds = new List<double> { sMin };
        bounds.AddRange(groups.Select(g => g[0].S));
        bounds.Add(sMax);
        var intervals = bounds.Count - 1;
        var midpoints = new (double S, FiberSolution Solution)[intervals];
        var samples = new List<Sample>();
        for (var k = 0; k < intervals; k++)
        {
            var s = 0.5 * (bounds[k] + bounds[k + 1]);
            var solution = _solver.Solve(_start, Point(origin, direction, s));
            midpoints[k] = (s, solution);
            samples.Add(Make(origin, direction, s, lineIndex, SampleKind.Midpoint, solution.RealCount, solution.RealSolutions.Select(r => r.Values).ToList(), solution.RealCountCertified));
        }

        for (var c = 0; c < groups.Count; c++)
        {
            var (left, right) = (midpoints[c].Solution.RealCount, midpoints[c + 1].Solution.RealCount);
            var at = groups[c][0].S.ToString("G6", CultureInfo.InvariantCulture);
            var boundary = groups[c].Any(x => x.IsBoundary);
            var folds = groups[c].Count(x => x.IsBoundary);
            if (boundary && (left - right) % 2 != 0)
            {
                flags.Add($"line {lineIndex}: the real count changes by an odd number ({left} to {right}) across the fold at s = {at}");
            }
            else if (folds == 1 && Math.Abs(left - right) != 2)
            {
                // A simple fold turns one real pair into a complex pair: any other change means a crossing nearby was
                // missed (or this one is not simple).
                flags.Add($"line {lineIndex}: the real count changes by {Math.Abs(left - right)} ({left} to {right}) across the single fold at s = {at}, not by 2: a crossing may be missing nearby");
            }
            else if (!boundary && left != right)
            {
                flags.Add($"line {lineIndex}: the real count changes ({left} to {right}) across a passage through infinity at s = {at}");
            }

            if (!boundary)
            {
                continue;
            }

            // Stay inside the neighbouring intervals: at most a quarter of each.
            var s = groups[c][0].S;
            var offset = AlongLine(groups[c][0], origin, direction, delta);
            if (offset <= 0)
            {
                continue;
            }

            var below = Math.Min(offset, 0.25 * (bounds[c + 1] - bounds[c]));
            var above = Math.Min(offset, 0.25 * (bounds[c + 2] - bounds[c + 1]));
            if (below >= 0.5 * offset)
            {
                samples.Add(Inherit(origin, direction, s - below, lineIndex, SampleKind.NearBoundary, midpoints[c], flags));
            }

            if (above >= 0.5 * offset)
            {
                samples.Add(Inherit(origin, direction, s + above, lineIndex, SampleKind.NearBoundary, midpoints[c + 1], flags));
            }
        }

        foreach (var crossing in atEnds.Where(c => c.IsBoundary))
        {
            var inner = crossing.S - sMin <= tolerance ? 0 : intervals - 1;
            var along = AlongLine(crossing, origin, direction, delta);
            var offset = Math.Min(along, 0.25 * (bounds[inner + 1] - bounds[inner]));
            if (along <= 0 || offset < 0.5 * along)
            {
                continue;
            }

            var s = inner == 0 ? sMin + offset : sMax - offset;
            samples.Add(Inherit(origin, direction, s, lineIndex, SampleKind.NearBoundary, midpoints[inner], flags));
        }

        // The uniform point that defined the line is s = 0; it lies in one interval.
        var home = 0;
        while (home < intervals - 1 && bounds[home + 1] < 0)
        {
            home++;
        }

        samples.Insert(0, Inherit(origin, direction, 0, lineIndex, SampleKind.Uniform, midpoints[home], flags));
        return samples;
    }

    /// <summary>The locus normal at a fold crossing (box-normalized), or null when unknown.</summary>
    public double[]? Normal(LineCrossing crossing, double[] origin, double[] direction)
    {
        if (crossing.Kind != CrossingKind.Fold || _widths is null)
        {
            return null;
        }

        var point = new double[direction.Length];
        for (var k = 0; k < direction.Length; k++)
        {
            point[k] = origin[k] + (crossing.S * direction[k]);
        }

        return LocusNormal.Compute(_solver.Compiled, crossing.Solution, point, _widths);
    }

    /// <summary>The offset along the line (s units) that puts a point δ from the locus, perpendicular to it.</summary>
    private double AlongLine(LineCrossing crossing, double[] origin, double[] direction, double delta)
    {
        var normal = Normal(crossing, origin, direction);
        if (normal is null)
        {
            return delta;
        }

        var unit = new double[direction.Length];
        for (var k = 0; k < direction.Length; k++)
        {
            unit[k] = direction[k] / _widths![k];
        }

        var cosine = 0.0;
        for (var k = 0; k < normal.Length; k++)
        {
            cosine += normal[k] * unit[k];
        }

        // Grazing lines would need very long offsets; beyond ten δ the point is no longer "near" along the line.
        return Math.Abs(cosine) < 0.05 ? 0 : delta / Math.Max(Math.Abs(cosine), 0.1);
    }

    /// <summary>A sample labeled by its interval's midpoint, with real solutions tracked from there.</summary>
    private Sample Inherit(double[] origin, double[] direction, double s, int line, SampleKind kind, (double S, FiberSolution Solution) midpoint, List<string> flags)
    {
        var label = midpoint.Solution.RealCount;
        var real = midpoint.Solution.RealSolutions.Select(r => r.Values).ToList();
        var target = Point(origin, direction, s);
        if (real.Count == 0)
        {
            return Make(origin, direction, s, line, kind, 0, [], midpoint.Solution.RealCountCertified);
        }

        var tracked = _solver.TrackSegment(Point(origin, direction, midpoint.S), target, real);
        if (tracked.AllRegular)
        {
            var points = tracked.Paths.Select(p => p.Endpoint!).ToList();
            var certified = _solver.Certify(target, points.Select((x, i) => (i, x)).ToArray());
            var allCertified = midpoint.Solution.RealCountCertified && certified.All(c => c.Certified && c.IsReal);
            return Make(origin, direction, s, line, kind, label, points, allCertified);
        }

        // Real-only tracking failed inside an interval that should hold no crossing: solve in full, keep the
        // inherited label, and say so if the two disagree.
        var full = _solver.Solve(_start, target);
        var sample = Make(origin, direction, s, line, kind, label, full.RealSolutions.Select(r => r.Values).ToList(), false);
        var at = s.ToString("G6", CultureInfo.InvariantCulture);
        if (full.RealCount != label)
        {
            sample.Flag = $"real-only tracking failed; a full solve finds {full.RealCount} real solutions, not {label}";
            flags.Add($"line {line}: at s = {at} {sample.Flag}");
        }

        return sample;
    }

    private Sample Make(double[] origin, double[] direction, double s, int line, SampleKind kind, int label, IReadOnlyList<Complex[]> real, bool certified)
    {
        var sample = new Sample { Label = label, Kind = kind, Line = line, S = s, Certified = certified };
        for (var k = 0; k < origin.Length; k++)
        {
            sample.Point.Add(origin[k] + (s * direction[k]));
        }

        foreach (var solution in real)
        {
            for (var i = 0; i < _unknowns; i++)
            {
                sample.Solutions.Add(solution[i].Real);
            }
        }

        return sample;
    }

    private static Complex[] Point(double[] origin, double[] direction, double s)
    {
        var point = new Complex[origin.Length];
        for (var k = 0; k < origin.Length; k++)
        {
            point[k] = origin[k] + (s * direction[k]);
        }

        return point;
    }
}
