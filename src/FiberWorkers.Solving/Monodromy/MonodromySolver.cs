using System.Numerics;
using FiberWorkers.Algebra.Evaluation;
using FiberWorkers.Algebra.LinearAlgebra;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Homotopies;
using FiberWorkers.Solving.Randomness;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Solving.Tracking;

namespace FiberWorkers.Solving.Monodromy;

/// <summary>
/// Finds the generic fiber of a family by monodromy (Duff, Hill, Jensen, Lee, Leykin &amp; Sommars 2019): start
/// from one solution x₀ of a base system, track the known solutions around loops (triangles of straight segments
/// through random complex parameter points) and keep every new endpoint, until the known set is closed under the
/// loops and a number of further loops add nothing. A family that cannot place x₀ in a fiber by choosing its own
/// parameters gets auxiliary parameters q on the constant terms, F(x; p) + q with q₀ = −F(x₀; p₀); the fiber at
/// q = 0 is then reached by one parameter homotopy with endgame (and a detour through a random point when paths
/// of it fail). Batches of loop tracks run in parallel; results are merged in a fixed order, so a seed gives the
/// same fiber on any number of threads.
/// </summary>
internal sealed class MonodromySolver
{
    private readonly PolynomialSystem _system;
    private readonly SolveOptions _solve;
    private readonly MonodromyOptions _options;

    public MonodromySolver(PolynomialSystem system, SolveOptions solve, MonodromyOptions options)
    {
        _system = system;
        _solve = solve;
        _options = options;
    }

    public (StartFiber Fiber, MonodromyReport Report) Solve(string familyHash, Complex[] basePoint)
    {
        var random = new SeededRandom(SeededRandom.Derive((ulong)_solve.Seed, "monodromy"));
        var n = _system.UnknownCount;
        var x0 = new Complex[n];
        for (var i = 0; i < n; i++)
        {
            x0[i] = random.NextComplexGaussian();
        }

        // Place x₀ in a fiber: by the family's own parameters when it is linear in them with enough of them,
        // otherwise with auxiliary constants q₀ = −F(x₀; p₀).
        var parameters = (Complex[])basePoint.Clone();
        var augmented = !TrySolveLinearParameters(x0, parameters);
        var system = augmented ? _system.WithConstantParameters() : _system;
        var basis = augmented ? Augment(x0, parameters) : parameters;

        var projective = system.Homogenize().Compile();
        var chart = ProjectiveChart.Random(n + 1, random);
        var solutions = new List<Complex[]> { x0 };
        var expected = _options.ExpectedRootCount;
        var solver = new FiberSolver(system, _solve);
        // With an expected count, the search ends once the family's own fiber holds that many solutions. At an
        // augmented base point the count is checked on the fiber after the homotopy to q = 0 (the augmented fiber
        // may be larger, and some of its solutions may go to infinity), whenever the augmented fiber has grown
        // by an eighth since the last check.
        (IReadOnlyList<Complex[]> Fiber, int FinalPaths, int Failed)? checkedFiber = null;
        var checkedAt = 0;
        var checkPaths = 0;
        Func<List<Complex[]>, bool> complete = expected is not { } goal ? _ => false
            : !augmented ? known => known.Count >= goal
            : known =>
            {
                if (known.Count < goal || (checkedAt > 0 && known.Count < checkedAt + Math.Max(1, checkedAt / 8)))
                {
                    return false;
                }

                checkedAt = known.Count;
                var atBase = FiberAtBase(solver, system, familyHash, augmented, basis, parameters, known, 0, random);
                checkPaths += atBase.FinalPaths;
                checkedFiber = atBase.Fiber.Count >= goal ? atBase : null;
                return checkedFiber is not null;
            };
        var phase = RunLoops(system, projective, chart, basis, solutions, complete, random);

        // Bring the base fiber to the family itself at p₀ when it was augmented.
        // A successful check ended the loops at once, so its fiber is the final one.
        var (found, lastPaths, finalFailures) = checkedFiber is { } reached
            ? (reached.Fiber, 0, reached.Failed)
            : FiberAtBase(solver, system, familyHash, augmented, basis, parameters, solutions, phase.Tracks, random);
        var finalPaths = checkPaths + lastPaths;
        var fiber = found.ToList();
        var tracks = phase.Tracks;
        var failedTracks = phase.Failed;
        var loopCount = phase.Loops;
        var stall = phase.Stall;
        var trace = phase.Trace;
        var skipped = phase.Skipped;
        // A complete augmented fiber (the trace test passed) carried to q = 0 with no path failed reaches every
        // isolated solution of the family's fiber (Morgan & Sommese 1989): paths that leave for infinity end at no
        // solution of it. Only failed paths can lose solutions, and only then do loops in the family's own
        // parameters search for them.
        var carried = trace is { Passed: true } && finalFailures == 0;
        if (augmented && fiber.Count > 0 && _system.ParameterCount > 0 && !(fiber.Count >= expected) && !carried)
        {
            // The homotopy to q = 0 can lose solutions whose paths meet singularities or escape; loops in the
            // family's own parameters, started from the fiber it reached, find them again wherever the family's
            // solutions form one connected (irreducible) set with those already known.
            var own = RunLoops(
                _system, _system.Homogenize().Compile(), ProjectiveChart.Random(n + 1, random), parameters, fiber,
                known => known.Count >= expected, random);
            tracks += own.Tracks;
            failedTracks += own.Failed;
            loopCount += own.Loops;
            stall = own.Stall;
            trace = own.Trace ?? trace;
            skipped = own.Skipped ?? skipped;
        }

        var completeness = expected is { } count && fiber.Count >= count ? "expected-count"
            : trace is { Passed: true } ? "trace-test"
            : "stopping-rule";
        var baseCount = solutions.Count;
        var report = new MonodromyReport
        {
            Loops = loopCount,
            LoopsWithoutNew = stall,
            LoopTracks = tracks,
            FailedTracks = failedTracks,
            Augmented = augmented,
            BaseRootCount = baseCount,
            FinalPaths = finalPaths,
            Completeness = completeness,
            TraceTest = trace,
            TraceTestSkipped = skipped,
        };
        var note = $"monodromy: {loopCount} loops, {tracks} loop tracks ({failedTracks} failed), {baseCount} solutions at the "
            + (augmented ? $"augmented base point, {fiber.Count} after the homotopy to q = 0; " : $"base point; ")
            + completeness switch
            {
                "expected-count" => $"reached the expected count {expected}",
                "trace-test" => $"the trace test on equation {trace!.Equation + 1} passed (relative deviation {trace.RelativeDeviation:E1})",
                _ => $"stopped after {stall} loops without a new solution"
                    + (trace is not null
                        ? $"; the trace test was inconclusive (relative deviation {trace.RelativeDeviation:E1}; it does not apply when the fiber "
                            + "has solutions at infinity on the moving slice, and further loops found nothing new)"
                        : skipped is not null ? $"; trace test not run: {skipped}" : string.Empty),
            };
        var provenance = new StartFiberProvenance("monodromy", (ulong)_solve.Seed, tracks * 3 + finalPaths, completeness, note);
        return (new StartFiber(familyHash, _system.Unknowns, parameters, fiber, provenance), report);
    }

    /// <summary>How many times <see cref="MonodromyOptions.StallLoops"/> the search waits while the trace test fails.</summary>
    internal const int TraceFailurePatience = 4;

    /// <summary>Loop endpoints of the same solution agree to about the tracker's accuracy; merge within this.</summary>
    private const double MergeTolerance = 1e-7;

    private (IReadOnlyList<Complex[]> Fiber, int FinalPaths, int Failed) FiberAtBase(
        FiberSolver solver,
        PolynomialSystem system,
        string familyHash,
        bool augmented,
        Complex[] basis,
        Complex[] parameters,
        List<Complex[]> solutions,
        long tracks,
        SeededRandom random)
    {
        // A start fiber needs completeness more than certificates: every distinct regular solution is kept, also
        // ill-conditioned ones that double precision cannot certify (dropping one would lose its paths forever).
        if (!augmented)
        {
            return ([.. solutions], 0, 0);
        }

        var target = new Complex[basis.Length];
        parameters.CopyTo(target, 0);
        var atZero = solver.Solve(Fiber(familyHash, system, basis, solutions, tracks), target);
        var fiber = atZero.Solutions.Select(s => s.Values).ToList();
        var paths = atZero.PathsTracked;
        var failures = atZero.StatusCounts[PathStatus.Failed];

        // Paths of the straight segment to q = 0 fail in pairs where it passes within rounding of a branch point
        // (two solutions meeting: step-size underflow at the same t, seen once in 150 five-bus fibers with equal
        // lines). A detour through a random point misses it with probability one. The whole fiber takes the
        // detour, not only the failed paths: the detour and the straight segment differ by a loop around that
        // branch point, which may exchange the failed paths' ends with those of paths that arrived.
        for (var attempt = 0; attempt < DetourAttempts && failures > 0; attempt++)
        {
            var detour = NewLoop(basis, random, 1)[0];
            var there = solver.Solve(Fiber(familyHash, system, basis, solutions, tracks), detour);
            var back = solver.Solve(Fiber(familyHash, system, detour, [.. there.Solutions.Select(s => s.Values)], tracks), target);
            paths += there.PathsTracked + back.PathsTracked;
            foreach (var point in back.Solutions)
            {
                if (!fiber.Any(known => Close(known, point.Values, _solve.DuplicateTolerance)))
                {
                    fiber.Add(point.Values);
                }
            }

            failures = there.StatusCounts[PathStatus.Failed] + back.StatusCounts[PathStatus.Failed];
        }

        return (fiber, paths, failures);
    }

    /// <summary>Detours tried when paths of the final homotopy fail.</summary>
    private const int DetourAttempts = 3;

    private static StartFiber Fiber(string familyHash, PolynomialSystem system, Complex[] point, List<Complex[]> solutions, long tracks) =>
        new(familyHash, system.Unknowns, point, solutions, new StartFiberProvenance("monodromy", 0, tracks, "stopping-rule", string.Empty));

    /// <summary>Loop endpoints for a batch, in batch order (null where a track failed).</summary>
    private Complex[]?[] TrackBatch(
        (int Solution, int Loop)[] batch,
        List<Complex[]> solutions,
        List<Complex[][]> loops,
        CompiledSystem projective,
        ProjectiveChart chart,
        Complex[] basis)
    {
        var ends = new Complex[]?[batch.Length];
        var threads = Math.Max(1, Math.Min(_solve.MaxDegreeOfParallelism, batch.Length));
        Parallel.For(
            0,
            batch.Length,
            new ParallelOptions { MaxDegreeOfParallelism = threads },
            (k, _) =>
            {
                var (solution, loop) = batch[k];
                ends[k] = AroundLoop(solutions[solution], loops[loop], projective, chart, basis);
            });
        return ends;
    }

    /// <summary>What one phase of loops did.</summary>
    private readonly record struct LoopPhase(int Loops, long Tracks, long Failed, int Stall, TraceTestResult? Trace, string? Skipped);

    /// <summary>
    /// Tracks every known (solution, loop) pair, adds new endpoints, adds loops while they keep finding solutions,
    /// and stops on the expected count, a passing trace test, or the stopping rule. <paramref name="solutions"/>
    /// grows in place; merging in batch order keeps it independent of thread counts.
    /// </summary>
    private LoopPhase RunLoops(
        PolynomialSystem system, CompiledSystem projective, ProjectiveChart chart, Complex[] basis, List<Complex[]> solutions,
        Func<List<Complex[]>, bool> complete, SeededRandom random)
    {
        var loops = new List<Complex[][]>();
        var pending = new List<(int Solution, int Loop)>();
        long tracks = 0;
        long failedTracks = 0;
        var stall = 0;
        var trace = (TraceTestResult?)null;
        var skipped = (string?)null;
        var traceTest = new TraceTest(system, _solve, _options.TraceTolerance);
        // A failed trace test is the only warning that solutions may be missing, so it quadruples the stall loops
        // needed before the stopping rule may end the search. Some base points have loops that mix the missing
        // solutions with the known ones only now and then: in a sixth to under half of the loops, for five-bus
        // microgrid fibers missing a group of 5 to 10 large solutions and for two-link-arm fibers missing one of
        // their two. With twice the stall loops about one microgrid fiber in 90 and one arm fiber in 30 stopped
        // short (600 seeds each); with four times, one microgrid fiber in 300 and one arm fiber in 1,200.
        var done = false;
        while (!done && loops.Count < _options.MaxLoops
            && stall < (trace is { Passed: false } ? TraceFailurePatience * _options.StallLoops : _options.StallLoops))
        {
            loops.Add(NewLoop(basis, random, LoopSpread(stall)));
            var before = solutions.Count;
            for (var s = 0; s < solutions.Count; s++)
            {
                pending.Add((s, loops.Count - 1));
            }

            while (pending.Count > 0 && !(done = complete(solutions)))
            {
                var batch = pending.ToArray();
                pending.Clear();
                var ends = TrackBatch(batch, solutions, loops, projective, chart, basis);
                tracks += batch.Length;
                foreach (var end in ends)
                {
                    if (end is null)
                    {
                        failedTracks++;
                        continue;
                    }

                    if (!solutions.Any(known => Close(known, end, MergeTolerance)))
                    {
                        solutions.Add(end);
                        for (var l = 0; l < loops.Count; l++)
                        {
                            pending.Add((solutions.Count - 1, l));
                        }
                    }
                }
            }

            stall = solutions.Count == before ? stall + 1 : 0;

            // Once a loop adds nothing, the trace test on the base fiber (two tracks per solution, cheaper than a
            // loop's three) can end the search. A failure means solutions are missing or that the test does not
            // apply (points of the fiber at infinity on the moving slice); the stopping rule then decides.
            done = done || complete(solutions);
            if (stall > 0 && _options.TraceTest && !done)
            {
                (trace, skipped) = traceTest.Run(basis, solutions, random);
                if (trace is { Passed: true })
                {
                    break;
                }
            }
        }

        return new LoopPhase(loops.Count, tracks, failedTracks, stall, trace, skipped);
    }

    private Complex[]? AroundLoop(Complex[] start, Complex[][] loop, CompiledSystem projective, ProjectiveChart chart, Complex[] basis)
    {
        var x = new Complex[start.Length + 1];
        chart.Lift(start, x);
        var corners = new[] { basis, loop[0], loop[1], basis };
        PathTracker? tracker = null;
        for (var edge = 0; edge < 3; edge++)
        {
            var homotopy = new ParameterHomotopy(projective, chart, corners[edge], corners[edge + 1]);
            tracker = new PathTracker(homotopy.CreateEvaluator());
            if (!tracker.Track(x, 0, 1, _solve.Tracker).Completed)
            {
                return null;
            }
        }

        // Refine in the chart, where solutions with large coordinates stay well scaled, and judge the point with
        // a chart-independent, row-equilibrated condition number; only then leave the chart.
        tracker!.Refine(x, 1, 4, 1e-15);
        if (Complex.Abs(x[0]) <= _solve.Endgame.InfinityThreshold * PathTracker.MaxNorm(x)
            || !(tracker.ProjectiveCondition(x, 1) <= _solve.Endgame.SingularConditionLimit))
        {
            return null;
        }

        var affinePoint = new Complex[start.Length];
        for (var i = 0; i < affinePoint.Length; i++)
        {
            affinePoint[i] = x[i + 1] / x[0];
        }

        return affinePoint;
    }

    /// <summary>
    /// The corners' spread relative to the base point: 1 while loops find new solutions, then doubling with each
    /// loop that found nothing, up to 16. Small triangles encircle the branch points near the base; once those
    /// stop adding solutions, the ones that join the missing solutions to the known ones may lie farther out
    /// (for the five-bus microgrid, where the large solutions of the base fiber meet the others). Loops wider
    /// than about 16 mixed those no more often.
    /// </summary>
    private static double LoopSpread(int loopsWithoutNew) => 1 << Math.Min(loopsWithoutNew, 4);

    private static Complex[][] NewLoop(Complex[] basis, SeededRandom random, double spread)
    {
        var corners = new Complex[2][];
        for (var c = 0; c < 2; c++)
        {
            corners[c] = new Complex[basis.Length];
            for (var k = 0; k < basis.Length; k++)
            {
                corners[c][k] = basis[k] + (spread * (1 + basis[k].Magnitude) * random.NextComplexGaussian());
            }
        }

        return corners;
    }

    /// <summary>(p₀, q₀) with q₀ = −F(x₀; p₀).</summary>
    private Complex[] Augment(Complex[] x0, Complex[] parameters)
    {
        var compiled = _system.Compile();
        var values = new Complex[_system.Equations.Count];
        compiled.Evaluate(x0, parameters, values, compiled.CreateWorkspace());
        return [.. parameters, .. values.Select(v => -v)];
    }

    /// <summary>
    /// When F is affine-linear in p with at least n parameters, chooses p so that F(x₀; p) = 0: the last m − n
    /// parameters stay random and the first n solve the n×n linear system. False when that is impossible.
    /// </summary>
    private bool TrySolveLinearParameters(Complex[] x0, Complex[] parameters)
    {
        var n = _system.UnknownCount;
        var m = _system.ParameterCount;
        if (m < n || _system.ParameterDegree > 1)
        {
            return false;
        }

        var compiled = _system.Compile();
        var workspace = compiled.CreateWorkspace();
        var values = new Complex[n];
        var jacobian = new Complex[n * n];
        var parameterJacobian = new Complex[n * m];
        var zero = new Complex[m];
        for (var k = n; k < m; k++)
        {
            zero[k] = parameters[k];
        }

        // F(x₀; p) = F(x₀; p_fixed) + A·p_free where A is ∂F/∂p restricted to the first n parameters (exact: F is affine in p).
        compiled.Evaluate(x0, zero, values, jacobian, parameterJacobian, workspace);
        var matrix = new Complex[n * n];
        for (var i = 0; i < n; i++)
        {
            for (var k = 0; k < n; k++)
            {
                matrix[(i * n) + k] = parameterJacobian[(i * m) + k];
            }
        }

        var pivots = new int[n];
        var norm = ComplexLu.OneNorm(matrix, n);
        if (!ComplexLu.Factor(matrix, n, pivots)
            || norm * ComplexLu.EstimateInverseOneNorm(matrix, n, pivots, new Complex[2 * n]) > 1e10)
        {
            return false;
        }

        for (var i = 0; i < n; i++)
        {
            values[i] = -values[i];
        }

        ComplexLu.Solve(matrix, n, pivots, values);
        for (var k = 0; k < n; k++)
        {
            parameters[k] = values[k];
        }

        return true;
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
}
