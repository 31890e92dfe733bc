using System.Numerics;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Atlas.Crossings;

/// <summary>
/// Finds the real crossings of a line p(s) = a + s·d on a segment [s_min, s_max]: the parameter homotopy carries the
/// generic fibers of the fold and passage families (see <see cref="LineFamilies"/>) to the real line (a, d), and the
/// real endpoints with s in the segment are the crossings. Thread-safe; each call tracks on the calling thread.
/// </summary>
internal sealed class CrossingFinder
{
    /// <summary>An endpoint is real when its imaginary parts are at most this, relative to its size.</summary>
    private const double RealTolerance = 1e-7;

    /// <summary>Crossings closer than this fraction of the segment are the same event.</summary>
    internal const double CoincidenceTolerance = 1e-8;

    private readonly LineFamilies _families;
    private readonly FiberSolver _folds;
    private readonly FiberSolver _passages;
    private readonly StartFiber _foldStart;
    private readonly StartFiber _passageStart;
    private readonly int _unknowns;

    public CrossingFinder(LineFamilies families, FiberSolver folds, StartFiber foldStart, FiberSolver passages, StartFiber passageStart, int unknowns)
    {
        _families = families;
        _folds = folds;
        _passages = passages;
        _foldStart = foldStart;
        _passageStart = passageStart;
        _unknowns = unknowns;
    }

    /// <summary>Real crossings with s in [sMin, sMax], sorted by s; also reports paths tracked.</summary>
    public (List<LineCrossing> Crossings, int PathsTracked) Find(ReadOnlySpan<double> origin, ReadOnlySpan<double> direction, double sMin, double sMax)
    {
        var a = ToComplex(origin);
        var d = ToComplex(direction);
        var crossings = new List<LineCrossing>();
        var paths = 0;
        if (_foldStart.RootCount > 0)
        {
            var solution = _folds.Solve(_foldStart, _families.FoldParameters(a, d));
            paths += solution.PathsTracked;
            foreach (var path in solution.Paths)
            {
                if (path.Status is PathStatus.Regular or PathStatus.Singular && path.Endpoint is { } point
                    && TryReal(point, 2 * (_unknowns + 1), sMin, sMax, out var s, out var crossing))
                {
                    crossings.Add(crossing with { S = s });
                }
            }
        }

        if (_passageStart.RootCount > 0)
        {
            var solution = _passages.Solve(_passageStart, _families.PassageParameters(a, d));
            paths += solution.PathsTracked;
            foreach (var path in solution.Paths)
            {
                if (path.Status is PathStatus.Regular or PathStatus.Singular && path.Endpoint is { } point
                    && TryReal(point, _unknowns + 1, sMin, sMax, out var s, out var crossing))
                {
                    crossings.Add(crossing with { S = s, Kind = CrossingKind.Passage });
                }
            }
        }

        // Two solutions meeting at infinity also satisfy X₀ = 0: the passage family sees every fold at infinity too.
        // A passage at the same s as a fold is that fold, not a separate event.
        var tolerance = CoincidenceTolerance * (sMax - sMin);
        crossings.RemoveAll(c => c.Kind == CrossingKind.Passage
            && crossings.Any(f => f.IsBoundary && Math.Abs(f.S - c.S) <= tolerance));
        crossings.Sort((x, y) => x.S.CompareTo(y.S));
        return (crossings, paths);
    }

    /// <summary>
    /// Reads a fold or passage endpoint (X in the chart first, s at <paramref name="sIndex"/>): real when s is real
    /// and X is a complex multiple of a real vector.
    /// </summary>
    private bool TryReal(Complex[] point, int sIndex, double sMin, double sMax, out double s, out LineCrossing crossing)
    {
        crossing = null!;
        s = point[sIndex].Real;

        // A crossing on a tile edge belongs to both neighbours; rounding must not make both miss it.
        var edge = CoincidenceTolerance * (sMax - sMin);
        if (Math.Abs(point[sIndex].Imaginary) > RealTolerance * (1 + Math.Abs(s)) || s < sMin - edge || s > sMax + edge)
        {
            return false;
        }

        s = Math.Clamp(s, sMin, sMax);

        // X is only defined up to the complex chart's scale: divide by its largest entry, then it must be real.
        var largest = 0;
        for (var j = 1; j <= _unknowns; j++)
        {
            if (point[j].Magnitude > point[largest].Magnitude)
            {
                largest = j;
            }
        }

        var scale = point[largest];
        var normalized = new double[_unknowns + 1];
        for (var j = 0; j <= _unknowns; j++)
        {
            var value = point[j] / scale;
            if (Math.Abs(value.Imaginary) > RealTolerance)
            {
                return false;
            }

            normalized[j] = value.Real;
        }

        var atInfinity = Math.Abs(normalized[0]) <= 1e-8;
        var solution = new double[_unknowns];
        for (var j = 0; j < _unknowns; j++)
        {
            solution[j] = atInfinity ? normalized[j + 1] : normalized[j + 1] / normalized[0];
        }

        crossing = new LineCrossing(s, atInfinity ? CrossingKind.FoldAtInfinity : CrossingKind.Fold, solution);
        return true;
    }

    private static Complex[] ToComplex(ReadOnlySpan<double> values)
    {
        var result = new Complex[values.Length];
        for (var k = 0; k < values.Length; k++)
        {
            result[k] = values[k];
        }

        return result;
    }
}
