using System.Globalization;
using System.Numerics;
using FiberWorkers.Algebra.Evaluation;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Algebra.Newton;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Certification;
using FiberWorkers.Solving.Homotopies;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Solving.Tracking;

namespace FiberWorkers.Solving.Fibers;

/// <summary>
/// Solves fibers of one family: the total-degree homotopy at a point, start fibers at a generic complex point,
/// the parameter homotopy from a start fiber to any point, and real segments between two points. Compiles the
/// family once; thread-safe (each call makes its own per-thread trackers).
/// </summary>
public sealed class FiberSolver
{
    /// <summary>
    /// Largest κ₁(∂F/∂x) of a regular segment end. A segment that ends on a fold (the generic way a real segment
    /// meets the discriminant) converges there only to about √ε in double precision (Newton is linear at a double
    /// root), which leaves κ near 1/√ε ≈ 7·10⁷ — under the general singular limit of 10⁹, so two "regular" points a
    /// few 10⁻⁸ apart would be reported. An end with κ above 10⁷ cannot be told apart from such a fold.
    /// </summary>
    private const double SegmentEndConditionLimit = 1e7;

    /// <summary>
    /// The largest κ₁ at which the end of a segment track counts as regular: the segment limit, or the endgame's
    /// singular limit when lower. Callers that track with <see cref="TrackerOptions.EstimateEndCondition"/> off apply
    /// it to the certificates' exact condition.
    /// </summary>
    public double EndConditionLimit => Math.Min(Options.Endgame.SingularConditionLimit, SegmentEndConditionLimit);

    /// <summary>A segment's start with ‖F‖∞ at most this (relative to 1 + ‖x‖∞) is tracked as given.</summary>
    private const double StartResidual = 1e-13;

    /// <summary>
    /// The last certifier this thread built: queries certify several sets of points at one parameter point (real-only
    /// ends, ends around a fold, a neighbour's), and the certifier's coefficient magnitudes and norm are per point.
    /// </summary>
    [ThreadStatic]
    private static AlphaCertifier? t_certifier;

    private readonly CompiledSystem _affine;
    private readonly CompiledSystem _projective;
    private readonly CoefficientLayout _layout;

    /// <summary>Compiles <paramref name="system"/> (affine and homogenized).</summary>
    public FiberSolver(PolynomialSystem system, SolveOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(system);
        if (!system.IsSquare)
        {
            throw new ArgumentException("the solver needs a square system", nameof(system));
        }

        System = system;
        Options = options ?? SolveOptions.Default;
        _affine = system.Compile();
        _projective = system.Homogenize().Compile();
        _layout = new CoefficientLayout(system);
    }

    /// <summary>The family's system.</summary>
    public PolynomialSystem System { get; }

    /// <summary>The settings of every solve made by this solver.</summary>
    public SolveOptions Options { get; }

    /// <summary>The compiled affine system F(x; p).</summary>
    public CompiledSystem Compiled => _affine;

    /// <summary>
    /// Solves F(x; p) = 0 at one point with the total-degree homotopy (Π dᵢ paths, γ trick, projective chart).
    /// Throws <see cref="PathLimitExceededException"/> when the Bézout number exceeds the path limit.
    /// </summary>
    /// <param name="parameters">The parameter point.</param>
    /// <param name="rootCountBound">
    /// A known upper bound on the number of isolated solutions (the generic root count, a published bound or the
    /// family's rootCount). When the solve reaches it, no finite solution can hide among paths judged at infinity
    /// from their decay alone, and the real count may be certified.
    /// </param>
    public FiberSolution SolveTotalDegree(ReadOnlySpan<Complex> parameters, int? rootCountBound = null)
    {
        RequireParameters(parameters);
        var bezout = System.BezoutNumber;
        if (bezout > Options.MaxPaths)
        {
            throw new PathLimitExceededException(bezout.ToString(CultureInfo.InvariantCulture), Options.MaxPaths);
        }

        var random = new SeededRandom(SeededRandom.Derive((ulong)Options.Seed, "total-degree"));
        var chart = ProjectiveChart.Random(System.UnknownCount + 1, random);
        var gamma = random.NextUnitComplex();
        var homotopy = new TotalDegreeHomotopy(_projective, System.Degrees, parameters, chart, gamma);
        var paths = RunPaths(homotopy, (int)homotopy.PathCount, homotopy.StartSolution, Options.Tracker);
        return Finish("total-degree", parameters, paths, (index, options) => RunPaths(homotopy, [index], homotopy.StartSolution, options)[0], rootCountBound);
    }

    /// <summary>
    /// Computes the start fiber: a total-degree solve at a random generic complex point p₀ (seeded, scaled to the
    /// parameter box when one is given), keeping the certified distinct regular solutions.
    /// </summary>
    public StartFiber CreateStartFiber(string familyHash, IReadOnlyList<ParameterBox>? box = null)
    {
        ArgumentNullException.ThrowIfNull(familyHash);
        var point = GenericPoint(box, "start-fiber");
        var solution = SolveTotalDegree(point);
        // Completeness matters more than certificates here: every distinct regular solution is kept, including
        // ill-conditioned ones double precision cannot certify (a dropped one would lose its path for every later solve).
        var kept = solution.Solutions.Select(s => s.Values).ToArray();
        var failed = solution.StatusCounts[PathStatus.Failed];
        var note = $"total-degree homotopy with {solution.PathsTracked} paths at a random complex point: {kept.Length} distinct "
            + $"regular solutions ({solution.Solutions.Count(s => s.Certificate.ApproximateZero)} certified), "
            + $"{solution.StatusCounts[PathStatus.AtInfinity]} paths at infinity, "
            + $"{solution.StatusCounts[PathStatus.Singular]} singular, {failed} failed"
            + (failed == 0 ? "; complete with probability one" : "; some solutions may be missing");
        var provenance = new StartFiberProvenance(
            "total-degree", (ulong)Options.Seed, solution.PathsTracked, failed == 0 ? "homotopy" : "incomplete", note);
        return new StartFiber(familyHash, System.Unknowns, point, kept, provenance);
    }

    /// <summary>A random generic complex parameter point: box centre + half-width · (complex normal), seeded.</summary>
    public Complex[] GenericPoint(IReadOnlyList<ParameterBox>? box, string stream) =>
        GenericPoint(System.ParameterCount, Options.Seed, box, stream);

    /// <summary>
    /// <see cref="GenericPoint(IReadOnlyList{ParameterBox}?, string)"/> for <paramref name="parameterCount"/>
    /// parameters and <paramref name="seed"/>, without a solver (and its compiled systems).
    /// </summary>
    public static Complex[] GenericPoint(int parameterCount, int seed, IReadOnlyList<ParameterBox>? box, string stream)
    {
        var random = new SeededRandom(SeededRandom.Derive((ulong)seed, stream));
        var point = new Complex[parameterCount];
        for (var k = 0; k < point.Length; k++)
        {
            var (centre, halfWidth) = box is { Count: > 0 } ? ((box[k].Low + box[k].High) / 2, box[k].Width / 2) : (0.0, 1.0);
            point[k] = centre + (halfWidth * random.NextComplexGaussian());
        }

        return point;
    }

    /// <summary>Reaches the fiber over <paramref name="parameters"/> from a start fiber by the parameter homotopy.</summary>
    public FiberSolution Solve(StartFiber start, ReadOnlySpan<Complex> parameters)
    {
        ArgumentNullException.ThrowIfNull(start);
        RequireParameters(parameters);
        if (start.Parameters.Length != System.ParameterCount || start.Unknowns.Count != System.UnknownCount)
        {
            throw new ArgumentException("the start fiber does not belong to this system", nameof(start));
        }

        var random = new SeededRandom(SeededRandom.Derive((ulong)Options.Seed, "parameter-chart"));
        var chart = ProjectiveChart.Random(System.UnknownCount + 1, random);
        var homotopy = new ParameterHomotopy(_projective, chart, start.Parameters, parameters);
        void Lift(long index, Span<Complex> x) => chart.Lift(start.Solutions[(int)index], x);
        var paths = RunPaths(homotopy, start.Solutions.Count, Lift, Options.Tracker);
        // No fiber has more isolated solutions than the generic one (Morgan & Sommese 1989): the start fiber's size bounds it.
        return Finish("parameter", parameters, paths, (index, options) => RunPaths(homotopy, [index], Lift, options)[0], start.RootCount);
    }

    /// <summary>
    /// Reaches the fiber over <paramref name="parameters"/> from a start fiber close by along the straight segment in
    /// affine coordinates, with no endgame: the parameter homotopy's N paths, each of which must end regular (see
    /// <see cref="TrackSegment"/>), then certified. A fiber whose N endpoints are certified distinct approximate zeros
    /// is complete, since no fiber has more isolated solutions than the generic one (Morgan &amp; Sommese 1989). Paths
    /// that meet a singularity or run off towards infinity fail instead of being followed there; the caller then
    /// solves with <see cref="Solve"/>, whose projective chart and endgame handle them. Made for start fibers at
    /// complex points near the target, where paths are short and well conditioned.
    /// </summary>
    public FiberSolution SolveAlongSegment(StartFiber start, ReadOnlySpan<Complex> parameters, TrackerOptions? tracker = null)
    {
        ArgumentNullException.ThrowIfNull(start);
        RequireParameters(parameters);
        if (start.Parameters.Length != System.ParameterCount || start.Unknowns.Count != System.UnknownCount)
        {
            throw new ArgumentException("the start fiber does not belong to this system", nameof(start));
        }

        var point = parameters.ToArray();
        var segment = TrackSegment(start.Parameters, point, start.Solutions, tracker);
        var regular = segment.Paths.Where(p => p.Status == PathStatus.Regular).Select(p => (p.Index, p.Endpoint!)).ToArray();
        var solutions = Certify(point, regular);
        var paths = segment.Paths;
        if (!(tracker ?? Options.Tracker).EstimateEndCondition && solutions.Any(s => !(s.Condition <= EndConditionLimit)))
        {
            // The track left the ends' condition to the certificates: an end above the limit fails as it would have.
            var failed = solutions.Where(s => !(s.Condition <= EndConditionLimit)).Select(s => s.PathIndex).ToHashSet();
            paths = [.. paths.Select(p => failed.Contains(p.Index) ? p with { Status = PathStatus.Failed, Failure = PathFailure.IllConditionedEnd } : p)];
            solutions = Certify(point, [.. regular.Where(r => !failed.Contains(r.Index))]);
        }

        return new FiberSolution("parameter", point, paths, solutions, point.All(v => v.Imaginary == 0), start.RootCount);
    }

    /// <summary>
    /// Tracks given solutions at <paramref name="from"/> along the straight segment to <paramref name="to"/>
    /// (affine coordinates, no endgame). A path that meets a singularity on the way fails instead of crossing it:
    /// step-size underflow, a singular Jacobian, or an ill-conditioned end (κ above 10⁷, which in double precision
    /// cannot be told apart from an end on a fold of the discriminant); paths that reach the same point are
    /// re-tracked tightly and otherwise marked as path jumping.
    /// </summary>
    /// <param name="from">The segment's start, where <paramref name="solutions"/> solve the system.</param>
    /// <param name="to">The segment's end.</param>
    /// <param name="solutions">Solutions at <paramref name="from"/> (refined by Newton's method first unless their residual is already at rounding level).</param>
    /// <param name="tracker">Tracker settings for this segment (default: the solver's); short segments can start with long steps.</param>
    public SegmentResult TrackSegment(ReadOnlySpan<Complex> from, ReadOnlySpan<Complex> to, IReadOnlyList<Complex[]> solutions, TrackerOptions? tracker = null)
    {
        ArgumentNullException.ThrowIfNull(solutions);
        RequireParameters(from);
        RequireParameters(to);
        var homotopy = new ParameterHomotopy(_affine, null, from, to);
        var pathTracker = new PathTracker(homotopy.CreateEvaluator());
        var settings = tracker ?? Options.Tracker;
        var results = new PathResult[solutions.Count];
        for (var i = 0; i < solutions.Count; i++)
        {
            results[i] = TrackSegmentPath(pathTracker, i, solutions[i], settings);
        }

        // Two paths ending together on a real segment means one jumped (regular solutions have one path each).
        for (var i = 0; i < results.Length; i++)
        {
            for (var j = i + 1; j < results.Length; j++)
            {
                if (results[i].Status == PathStatus.Regular && results[j].Status == PathStatus.Regular
                    && Close(results[i].Endpoint!, results[j].Endpoint!, Options.DuplicateTolerance))
                {
                    results[i] = TrackSegmentPath(pathTracker, i, solutions[i], TrackerOptions.Tight) with { Retracked = true };
                    results[j] = TrackSegmentPath(pathTracker, j, solutions[j], TrackerOptions.Tight) with { Retracked = true };
                    if (results[i].Status == PathStatus.Regular && results[j].Status == PathStatus.Regular
                        && Close(results[i].Endpoint!, results[j].Endpoint!, Options.DuplicateTolerance))
                    {
                        results[j] = results[j] with { Status = PathStatus.Failed, Failure = PathFailure.PathJumping };
                    }
                }
            }
        }

        return new SegmentResult(to.ToArray(), results);
    }

    /// <summary>Certifies points as solutions at <paramref name="parameters"/>, distinctness included.</summary>
    public IReadOnlyList<FiberPoint> Certify(ReadOnlySpan<Complex> parameters, IReadOnlyList<(int PathIndex, Complex[] Values)> points)
    {
        ArgumentNullException.ThrowIfNull(points);
        RequireParameters(parameters);
        var certifier = t_certifier is { } last && last.Serves(_affine, parameters) ? last : new AlphaCertifier(_layout, _affine, parameters);
        t_certifier = certifier;
        var checks = new (Certificate Certificate, double Residual, double Condition)[points.Count];
        for (var i = 0; i < points.Count; i++)
        {
            checks[i] = certifier.Certify(points[i].Values);
        }

        var result = new FiberPoint[points.Count];
        for (var i = 0; i < points.Count; i++)
        {
            // Distinct from every other certified zero; a point that is not an approximate zero certifies nothing
            // about its neighbours (it is reported uncertified itself, which already withholds the count).
            var certificate = checks[i].Certificate;
            var distinct = certificate.ApproximateZero;
            for (var j = 0; j < points.Count && distinct; j++)
            {
                if (j != i && checks[j].Certificate.ApproximateZero)
                {
                    distinct = AlphaCertifier.CertainlyDistinct(points[i].Values, certificate, points[j].Values, checks[j].Certificate);
                }
            }

            result[i] = new FiberPoint
            {
                Values = points[i].Values,
                PathIndex = points[i].PathIndex,
                Residual = checks[i].Residual,
                Condition = checks[i].Condition,
                Certificate = certificate,
                Distinct = distinct,
            };
        }

        return result;
    }

    private PathResult TrackSegmentPath(PathTracker tracker, int index, Complex[] start, TrackerOptions options)
    {
        // Starts already zeros to rounding (stored samples, refined ends of an earlier segment) skip the Newton steps:
        // the tracker's first tangent factors the Jacobian there anyway.
        var x = (Complex[])start.Clone();
        if (!(tracker.ValueNorm(x, 0) <= StartResidual * (1 + PathTracker.MaxNorm(x))))
        {
            tracker.Refine(x, 0, 2, 1e-15);
        }

        var outcome = tracker.Track(x, 0, 1, options);
        if (!outcome.Completed)
        {
            return new PathResult
            {
                Index = index,
                Status = PathStatus.Failed,
                Failure = PathRunner.Failure(outcome.Status),
                Steps = outcome.Steps,
                Rejections = outcome.Rejections,
                Reached = outcome.Reached,
            };
        }

        double condition;
        if (options.EstimateEndCondition)
        {
            tracker.Refine(x, 1, Math.Max(1, options.EndNewtonSteps), 1e-15, out condition);
        }
        else
        {
            // Judged by the caller from the certificate; here only a failed factorization or a non-finite step fails.
            condition = double.IsFinite(tracker.Refine(x, 1, Math.Max(1, options.EndNewtonSteps), 1e-15)) ? double.NaN : double.PositiveInfinity;
        }

        var status = double.IsNaN(condition) || condition <= EndConditionLimit ? PathStatus.Regular : PathStatus.Failed;
        return new PathResult
        {
            Index = index,
            Status = status,
            Failure = status == PathStatus.Failed ? PathFailure.IllConditionedEnd : PathFailure.None,
            Endpoint = x,
            Steps = outcome.Steps,
            Rejections = outcome.Rejections,
            Condition = condition,
            Residual = tracker.ValueNorm(x, 1),
        };
    }

    private PathResult[] RunPaths(IHomotopyDefinition homotopy, int count, Action<long, Span<Complex>> start, TrackerOptions options) =>
        RunPaths(homotopy, Enumerable.Range(0, count).ToArray(), start, options);

    private PathResult[] RunPaths(IHomotopyDefinition homotopy, int[] indices, Action<long, Span<Complex>> start, TrackerOptions options)
    {
        var results = new PathResult[indices.Length];
        var threads = Math.Max(1, Math.Min(Options.MaxDegreeOfParallelism, indices.Length));
        if (threads == 1)
        {
            var runner = new PathRunner(homotopy.CreateEvaluator(), Options.Endgame);
            var buffer = new Complex[homotopy.Dimension];
            for (var k = 0; k < indices.Length; k++)
            {
                start(indices[k], buffer);
                results[k] = runner.Run(indices[k], buffer, options);
            }

            return results;
        }

        Parallel.For(
            0,
            indices.Length,
            new ParallelOptions { MaxDegreeOfParallelism = threads },
            () => (Runner: new PathRunner(homotopy.CreateEvaluator(), Options.Endgame), Buffer: new Complex[homotopy.Dimension]),
            (k, _, local) =>
            {
                start(indices[k], local.Buffer);
                results[k] = local.Runner.Run(indices[k], local.Buffer, options);
                return local;
            },
            _ => { });
        return results;
    }

    private FiberSolution Finish(
        string method, ReadOnlySpan<Complex> parameters, PathResult[] paths, Func<int, TrackerOptions, PathResult> retrack, int? rootCountBound)
    {
        var point = parameters.ToArray();
        var newton = new NewtonWorkspace(_affine);
        for (var i = 0; i < paths.Length; i++)
        {
            paths[i] = RefineEndpoint(paths[i], point, newton);
            if (Options.RetrackFailed && paths[i].Status == PathStatus.Failed)
            {
                paths[i] = RefineEndpoint(retrack(i, TrackerOptions.Tight), point, newton) with { Retracked = true };
            }
        }

        // Path jumping: regular solutions of a square system each attract exactly one path of these homotopies,
        // so two paths at one regular endpoint mean a jump. Re-track those with tighter settings.
        var duplicates = DuplicatePaths(paths);
        if (duplicates.Count > 0)
        {
            foreach (var index in duplicates)
            {
                paths[index] = RefineEndpoint(retrack(index, TrackerOptions.Tight), point, newton) with { Retracked = true };
            }

            foreach (var index in DuplicatePaths(paths).Order())
            {
                // Keep the first path that reached each point; the others are honest failures.
                var first = Array.FindIndex(paths, p => p.Status == PathStatus.Regular
                    && Close(p.Endpoint!, paths[index].Endpoint!, Options.DuplicateTolerance));
                if (first != index)
                {
                    paths[index] = paths[index] with { Status = PathStatus.Failed, Failure = PathFailure.PathJumping };
                }
            }
        }

        var regular = paths.Where(p => p.Status == PathStatus.Regular).Select(p => (p.Index, p.Endpoint!)).ToArray();
        var solutions = Certify(point, regular);
        var realParameters = point.All(v => v.Imaginary == 0);
        return new FiberSolution(method, point, paths, solutions, realParameters, rootCountBound);
    }

    private PathResult RefineEndpoint(PathResult path, Complex[] parameters, NewtonWorkspace workspace)
    {
        if (path.Endpoint is null || path.Status is not (PathStatus.Regular or PathStatus.Singular))
        {
            return path;
        }

        // The path already ends converged in the chart; a few affine Newton steps bring it to full precision
        // in the coordinates the certificate is computed in.
        var x = (Complex[])path.Endpoint.Clone();
        // Regular ends get their condition number exactly from the certificate; only singular ones need the estimate.
        var regular = path.Status == PathStatus.Regular;
        var options = new NewtonOptions { MaxIterations = regular ? 3 : 0, StepTolerance = 1e-15, EstimateCondition = !regular };
        var result = NewtonSolver.Solve(_affine, parameters, x, options, workspace);
        return path with { Endpoint = x, Residual = result.ResidualNorm, Condition = result.ConditionEstimate };
    }

    private List<int> DuplicatePaths(PathResult[] paths)
    {
        var duplicates = new HashSet<int>();
        for (var i = 0; i < paths.Length; i++)
        {
            if (paths[i].Status != PathStatus.Regular)
            {
                continue;
            }

            for (var j = i + 1; j < paths.Length; j++)
            {
                if (paths[j].Status == PathStatus.Regular && Close(paths[i].Endpoint!, paths[j].Endpoint!, Options.DuplicateTolerance))
                {
                    duplicates.Add(i);
                    duplicates.Add(j);
                }
            }
        }

        return [.. duplicates];
    }

    private static bool Close(ReadOnlySpan<Complex> a, ReadOnlySpan<Complex> b, double tolerance)
    {
        var scale = 1.0;
        var distance = 0.0;
        for (var i = 0; i < a.Length; i++)
        {
            distance = Math.Max(distance, Complex.Abs(a[i] - b[i]));
            scale = Math.Max(scale, a[i].Magnitude);
        }

        return distance <= tolerance * scale;
    }

    private void RequireParameters(ReadOnlySpan<Complex> parameters)
    {
        if (parameters.Length != System.ParameterCount)
        {
            throw new ArgumentException($"{parameters.Length} parameter values given, the family has {System.ParameterCount}");
        }
    }
}

/// <summary>The ends of paths tracked along a real segment.</summary>
/// <param name="Target">The segment's end point.</param>
/// <param name="Paths">One result per input solution, in order.</param>
public sealed record SegmentResult(Complex[] Target, IReadOnlyList<PathResult> Paths)
{
    /// <summary>True when every path reached a well-conditioned end.</summary>
    public bool AllRegular => Paths.All(p => p.Status == PathStatus.Regular);
}
