using System.Numerics;
using System.Runtime.ExceptionServices;
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
/// from one solution x₀ of a base system, carry the known solutions along the edges of a homotopy graph (the base
/// point and random complex parameter points, joined pairwise by straight segments) and keep every new endpoint,
/// until the known sets are closed under the graph's loops and the trace test passes, or further loops add
/// nothing. A family that cannot place x₀ in a fiber by choosing its own parameters gets auxiliary parameters q on
/// the constant terms, F(x; p) + q with q₀ = −F(x₀; p₀); the fiber at q = 0 is then reached by one parameter homotopy
/// with endgame (and a detour through a random point when paths of it fail). Families whose parameter-free equations
/// have an irreducible solution set and whose other equations are affine-linear in the parameters (power flow with
/// unit voltages) place x₀ in a fiber of their own instead (<see cref="FiberPlacement"/>). Segment tracks run on all
/// threads as soon as they exist; results are merged in an order that depends only on earlier merges, so a seed gives
/// the same fiber on any number of threads.
/// </summary>
internal sealed class MonodromySolver
{
    private readonly PolynomialSystem _system;
    private readonly SolveOptions _solve;
    private readonly MonodromyOptions _options;
    private readonly TrackerOptions _edgeTracker;

    public MonodromySolver(PolynomialSystem system, SolveOptions solve, MonodromyOptions options)
    {
        _system = system;
        _solve = solve;
        _options = options;
        _edgeTracker = EdgeTracker(solve.Tracker);
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

        // Place x₀ in a fiber: in the family's own where its shape allows (FiberPlacement), otherwise with auxiliary
        // constants q₀ = −F(x₀; p₀).
        var parameters = (Complex[])basePoint.Clone();
        var drawn = (Complex[])x0.Clone();
        var augmented = !(_options.OwnFiberPlacement && FiberPlacement.TryPlace(_system, x0, parameters));
        if (augmented)
        {
            // Placement may have moved x₀ and some parameters before it gave up.
            basePoint.CopyTo(parameters, 0);
            drawn.CopyTo(x0, 0);
        }
        var system = augmented ? _system.WithConstantParameters() : _system;
        var basis = augmented ? Augment(x0, parameters) : parameters;

        var projective = system.Homogenize().Compile();
        var chart = ProjectiveChart.Random(n + 1, random);
        var solutions = new List<Complex[]> { x0 };
        var expected = _options.ExpectedRootCount;
        // Compiled only where a homotopy to q = 0 needs it (an augmented base point).
        var solver = new Lazy<FiberSolver>(() => new FiberSolver(system, _solve));
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
        var phase = RunGraph(system, projective, chart, basis, solutions, complete, random);

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
        var nodes = phase.Nodes;
        var edges = phase.Edges;
        var stall = phase.Stall;
        var trace = phase.Trace;
        var skipped = phase.Skipped;
        var tracePaths = phase.TracePaths;
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
            var own = RunGraph(
                _system, _system.Homogenize().Compile(), ProjectiveChart.Random(n + 1, random), parameters, fiber,
                known => known.Count >= expected, random);
            tracks += own.Tracks;
            failedTracks += own.Failed;
            loopCount += own.Loops;
            nodes += own.Nodes;
            edges += own.Edges;
            stall = own.Stall;
            trace = own.Trace ?? trace;
            skipped = own.Skipped ?? skipped;
            tracePaths += own.TracePaths;
        }

        var completeness = expected is { } count && fiber.Count >= count ? "expected-count"
            : trace is { Passed: true } ? "trace-test"
            : "stopping-rule";
        var baseCount = solutions.Count;
        var report = new MonodromyReport
        {
            Loops = loopCount,
            LoopsWithoutNew = stall,
            Nodes = nodes,
            Edges = edges,
            SegmentTracks = tracks,
            FailedTracks = failedTracks,
            Augmented = augmented,
            BaseRootCount = baseCount,
            FinalPaths = finalPaths,
            TracePaths = tracePaths,
            Completeness = completeness,
            TraceTest = trace,
            TraceTestSkipped = skipped,
        };
        var note = $"monodromy: {nodes} points joined by {edges} segments ({loopCount} loops), {tracks} segment tracks ({failedTracks} failed), {tracePaths} trace-test paths, {baseCount} solutions at the "
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
        var provenance = new StartFiberProvenance("monodromy", (ulong)_solve.Seed, tracks + finalPaths + tracePaths, completeness, note);
        return (new StartFiber(familyHash, _system.Unknowns, parameters, fiber, provenance), report);
    }

    /// <summary>How many times <see cref="MonodromyOptions.StallLoops"/> the search waits while the trace test fails.</summary>
    internal const int TraceFailurePatience = 4;

    /// <summary>Loop endpoints of the same solution agree to about the tracker's accuracy; merge within this.</summary>
    private const double MergeTolerance = 1e-7;

    private (IReadOnlyList<Complex[]> Fiber, int FinalPaths, int Failed) FiberAtBase(
        Lazy<FiberSolver> solver,
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
        var atZero = solver.Value.Solve(Fiber(familyHash, system, basis, solutions, tracks), target);
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
            var detour = NewPoint(basis, random, 1);
            var there = solver.Value.Solve(Fiber(familyHash, system, basis, solutions, tracks), detour);
            var back = solver.Value.Solve(Fiber(familyHash, system, detour, [.. there.Solutions.Select(s => s.Values)], tracks), target);
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

    /// <summary>
    /// The threads that carry solutions along a graph's edges, kept for the whole search: <see cref="Carry"/> runs
    /// the pending tasks, and every task their results create, until none is left (the graph is at rest) or the
    /// completeness check holds. Tracks run on up to the solver's thread count as soon as their task exists. Results
    /// are merged one at a time in a merge order that depends only on earlier merges, never on the threads or their
    /// timing, so the graph, its solutions and the counts do not depend on them either: tasks a merge creates go
    /// ahead of all older ones but the next <see cref="Lead"/>. A task whose matching is already known when it is
    /// merged (a track from the other end found the pair) is dropped; one found so when a thread picks it up is not
    /// tracked at all, which changes only the work done, not the graph.
    /// </summary>
    /// <remarks>
    /// Depth first: a new solution is carried on at once, so the loop that found it is followed to its end before
    /// the next known solution enters the new edges. The graph at rest is the same in any order; what changes is how
    /// soon a solution is found, and the search ends as soon as the expected count is reached (five-bus microgrid,
    /// count 70, seeds 1–30 on one thread: 29,443 → 27,957 segment tracks, the same fibers). Strictly first (no lead),
    /// the tracks that follow a loop form a chain in which each waits for the one before, and a second thread finds
    /// nothing to do but tracks that the chain later makes redundant (16 % of its tracks); a lead of 4 keeps both
    /// threads on needed tracks (4 % redundant, as merging in creation order had), 2 and 8 were no better.
    /// Every thread runs <see cref="Work"/>: under one lock it merges the results that are next in merge order,
    /// then takes the first task in that order no thread has taken and tracks it outside the lock. There is no
    /// merging thread to hand results to: whichever thread finds the next results ready merges them. A merge that
    /// adds a base solution holds further merges until the completeness check on that base fiber has run (outside
    /// the lock, while the other threads keep tracking). Helper threads wait between searches of the graph instead
    /// of ending: a thread started for each of them cost 0.1 ms before it tracked anything.
    /// With an expected count the search does not wait for rest to add the next node when it would add one there
    /// anyway (<see cref="Extend"/>): as soon as a merge leaves at most <see cref="ExtendBelow"/> unmerged tasks that
    /// still need a track, the next node's tasks join the queue behind them, so a second thread tracks those instead
    /// of waiting for the last tracks of a loop (five-bus microgrid, count 70, seeds 1–12 on two threads, two runs of
    /// `fiber bench monodromy` each: aggregate 3.16×, 3.20× against 3.07×, 3.14× without).
    /// </remarks>
    private sealed class Carrier : IDisposable
    {
        /// <summary>How many of the oldest unmerged tasks stay ahead of the tasks a merge creates.</summary>
        internal const int Lead = 4;

        private readonly MonodromySolver _solver;
        private readonly HomotopyGraph _graph;
        private readonly CompiledSystem _projective;
        private readonly ProjectiveChart _chart;
        private readonly Func<bool> _complete;
        private readonly List<EdgeTask> _created = [];

        private readonly List<EdgeTask> _tasks = [];
        private readonly List<Complex[]?> _ends = [];
        private readonly List<TaskState> _states = [];
        private readonly List<Complex[]> _base;
        private readonly object _gate = new();
        private readonly Task[] _helpers;

        // The tasks not merged yet, in merge order from the end: the next to merge is the last.
        private readonly List<int> _order = [];
        private bool _checking;
        private bool _stop;
        private Exception? _fault;

        /// <summary>
        /// Called under the lock after a merge leaves at most <see cref="ExtendBelow"/> unmatched tasks: may add a
        /// node's tasks to the list it is given (they go behind every unmerged task) and returns whether it did.
        /// </summary>
        public Func<List<EdgeTask>, bool>? Extend { get; set; }

        internal const int ExtendBelow = 4;

        public Carrier(MonodromySolver solver, HomotopyGraph graph, CompiledSystem projective, ProjectiveChart chart, Func<bool> complete)
        {
            _solver = solver;
            _graph = graph;
            _projective = projective;
            _chart = chart;
            _complete = complete;
            _base = graph.Solutions[0];
            var threads = Math.Clamp(solver._solve.MaxDegreeOfParallelism, 1, Environment.ProcessorCount);
            _helpers = new Task[threads - 1];
            for (var w = 0; w < _helpers.Length; w++)
            {
                _helpers[w] = Task.Factory.StartNew(() => Work(helper: true), CancellationToken.None, TaskCreationOptions.LongRunning, TaskScheduler.Default);
            }
        }

        public long Tracks { get; private set; }

        public long Failed { get; private set; }

        /// <summary>The completeness check held: the search is over.</summary>
        public bool Done { get; private set; }

        /// <summary>
        /// Carries <paramref name="pending"/> (emptied) and every task their results create until the graph is at
        /// rest or the check holds; rethrows the first exception of any thread.
        /// </summary>
        public void Carry(List<EdgeTask> pending)
        {
            lock (_gate)
            {
                _created.AddRange(pending);
                pending.Clear();
                Append();
                Monitor.PulseAll(_gate);
            }

            Work(helper: false);
            if (_fault is not null)
            {
                ExceptionDispatchInfo.Throw(_fault);
            }
        }

        /// <summary>Ends the helper threads (after the running tracks).</summary>
        public void Dispose()
        {
            lock (_gate)
            {
                _stop = true;
                Monitor.PulseAll(_gate);
            }

            Task.WaitAll(_helpers);
        }

        /// <summary>
        /// Merges, takes tasks and tracks them until the carrier stops; the calling thread of <see cref="Carry"/>
        /// (not a helper) also returns when the graph is at rest.
        /// </summary>
        private void Work(bool helper)
        {
            var index = -1;
            Complex[]? end = null;
            // This thread's tracker for each edge, reused for every solution carried along it (either way).
            var trackers = new List<PathTracker?>();
            while (true)
            {
                Complex[] start = [];
                Complex[] from = [], to = [];
                var edge = 0;
                var forward = true;
                var check = false;
                lock (_gate)
                {
                    if (index >= 0)
                    {
                        _ends[index] = end;
                        _states[index] = TaskState.Tracked;
                        index = -1;
                    }

                    while (true)
                    {
                        if (!_checking && !_stop)
                        {
                            check = MergeReady();
                        }

                        if (_stop || (!helper && _order.Count == 0 && !_checking))
                        {
                            return;
                        }

                        if (check)
                        {
                            break;
                        }

                        if (NextQueued() is var next and >= 0)
                        {
                            index = next;
                            var task = _tasks[index];
                            if (_graph.Match(task.Edge, task.Forward, task.Source) != HomotopyGraph.Unknown)
                            {
                                _states[index] = TaskState.Skipped;
                                index = -1;
                                continue;
                            }

                            _states[index] = TaskState.Running;
                            (start, edge, forward, from, to) = Take(task);
                            break;
                        }

                        Monitor.Wait(_gate);
                    }
                }

                if (check)
                {
                    // The base fiber grew with the task merged last; the check decides before any later merge.
                    var done = Guard(_complete);
                    lock (_gate)
                    {
                        _checking = false;
                        if (done)
                        {
                            Done = true;
                            _stop = true;
                        }

                        Monitor.PulseAll(_gate);
                    }

                    continue;
                }

                while (trackers.Count <= edge)
                {
                    trackers.Add(null);
                }

                if (trackers[edge] is not { } tracker)
                {
                    // The edge's points were read under the lock: another thread may be adding nodes.
                    var homotopy = new ParameterHomotopy(_projective, _chart, from, to);
                    trackers[edge] = tracker = new PathTracker(homotopy.CreateEvaluator());
                }

                end = Guard(() => _solver.AlongEdge(tracker, start, forward, _chart));
            }
        }

        private (Complex[] Start, int Edge, bool Forward, Complex[] From, Complex[] To) Take(EdgeTask task)
        {
            var (a, _) = _graph.Ends(task.Edge, task.Forward);
            var (p, q) = _graph.Edges[task.Edge];
            return (_graph.Solutions[a][task.Source], task.Edge, task.Forward, _graph.Points[p], _graph.Points[q]);
        }

        /// <summary>Runs <paramref name="work"/>; on an exception records it and stops every thread.</summary>
        private T? Guard<T>(Func<T> work)
        {
            try
            {
                return work();
            }
            catch (Exception exception)
            {
                lock (_gate)
                {
                    _fault ??= exception;
                    _stop = true;
                    Monitor.PulseAll(_gate);
                }

                return default;
            }
        }

        /// <summary>
        /// Merges the results next in merge order (under the lock). True when the last one merged added a base
        /// solution and the check is now due (merging is then held).
        /// </summary>
        private bool MergeReady()
        {
            var merged = false;
            try
            {
                while (_order.Count > 0 && _states[_order[^1]] is TaskState.Tracked or TaskState.Skipped)
                {
                    merged = true;
                    var slot = _order[^1];
                    _order.RemoveAt(_order.Count - 1);
                    var task = _tasks[slot];
                    if (_states[slot] == TaskState.Skipped || _graph.Match(task.Edge, task.Forward, task.Source) != HomotopyGraph.Unknown)
                    {
                        continue;
                    }

                    Tracks++;
                    if (_ends[slot] is not { } end)
                    {
                        Failed++;
                        _graph.SetMatch(task.Edge, task.Forward, task.Source, HomotopyGraph.Failed);
                        TryExtend();
                        continue;
                    }

                    _ends[slot] = null;
                    var (_, to) = _graph.Ends(task.Edge, task.Forward);
                    var known = _graph.Solutions[to];
                    var target = known.FindIndex(x => Close(x, end, MergeTolerance));
                    var added = target < 0;
                    if (added)
                    {
                        known.Add(end);
                        target = known.Count - 1;
                        _graph.Enqueue(to, target, _created);
                        Append();
                    }

                    _graph.SetMatch(task.Edge, task.Forward, task.Source, target);
                    _graph.SetMatch(task.Edge, !task.Forward, target, task.Source);
                    if (added && ReferenceEquals(known, _base))
                    {
                        _checking = true;
                        return true;
                    }

                    TryExtend();
                }

                return false;
            }
            finally
            {
                if (merged)
                {
                    Monitor.PulseAll(_gate);
                }
            }
        }

        /// <summary>
        /// Puts the tasks just created, in the order they were created, ahead of every unmerged task but the
        /// <see cref="Lead"/> next ones (see the remarks).
        /// </summary>
        private void Append()
        {
            Enqueue(Math.Max(0, _order.Count - Lead));
        }

        /// <summary>
        /// Moves the tasks just created into the merge order with <paramref name="at"/> unmerged tasks behind them
        /// (0: behind every unmerged task), keeping their creation order among themselves.
        /// </summary>
        private void Enqueue(int at)
        {
            foreach (var task in _created)
            {
                _order.Insert(at, _tasks.Count);
                _tasks.Add(task);
                _ends.Add(null);
                _states.Add(TaskState.Queued);
            }

            _created.Clear();
        }

        /// <summary>
        /// Offers <see cref="Extend"/> a new node when few of the unmerged tasks still need a track. The count comes
        /// from the matchings alone (not from which tasks threads have taken), so the offer is made after the same
        /// merge on any number of threads.
        /// </summary>
        private void TryExtend()
        {
            if (Extend is null)
            {
                return;
            }

            var live = 0;
            foreach (var slot in _order)
            {
                var task = _tasks[slot];
                if (_graph.Match(task.Edge, task.Forward, task.Source) == HomotopyGraph.Unknown && ++live > ExtendBelow)
                {
                    return;
                }
            }

            if (Extend(_created))
            {
                Enqueue(0);
            }

            _created.Clear();
        }

        /// <summary>The first task in merge order that no thread has taken yet; −1 when there is none.</summary>
        private int NextQueued()
        {
            for (var k = _order.Count - 1; k >= 0; k--)
            {
                if (_states[_order[k]] == TaskState.Queued)
                {
                    return _order[k];
                }
            }

            return -1;
        }
    }

    private enum TaskState : byte
    {
        Queued,
        Running,
        Tracked,
        Skipped,
    }

    /// <summary>What one search of a homotopy graph did.</summary>
    private readonly record struct GraphPhase(int Nodes, int Edges, long Tracks, long Failed, int Stall, TraceTestResult? Trace, string? Skipped, long TracePaths)
    {
        /// <summary>Independent loops of the graph (its cycle rank).</summary>
        public int Loops => Edges - Nodes + 1;
    }

    /// <summary>One solution to carry along one edge, forward (A → B) or back.</summary>
    private readonly record struct EdgeTask(int Edge, bool Forward, int Source);

    /// <summary>
    /// Parameter points (nodes) joined by straight segments (edges), the solutions known at each node, and for
    /// each edge the partial matching of the two nodes' solutions that tracks along it have revealed.
    /// </summary>
    private sealed class HomotopyGraph
    {
        /// <summary>No track along the edge has reached or left this solution yet.</summary>
        public const int Unknown = -1;

        /// <summary>The track from this solution failed; the straight segment would fail again.</summary>
        public const int Failed = -2;

        public List<Complex[]> Points { get; } = [];

        public List<List<Complex[]>> Solutions { get; } = [];

        public List<(int A, int B)> Edges { get; } = [];

        /// <summary>Per edge: the matching A → B and B → A by solution index.</summary>
        private readonly List<(List<int> Forward, List<int> Back)> _matching = [];

        public (int From, int To) Ends(int edge, bool forward) =>
            forward ? (Edges[edge].A, Edges[edge].B) : (Edges[edge].B, Edges[edge].A);

        public int Match(int edge, bool forward, int source)
        {
            var list = forward ? _matching[edge].Forward : _matching[edge].Back;
            return source < list.Count ? list[source] : Unknown;
        }

        public void SetMatch(int edge, bool forward, int source, int target)
        {
            var list = forward ? _matching[edge].Forward : _matching[edge].Back;
            while (list.Count <= source)
            {
                list.Add(Unknown);
            }

            if (list[source] == Unknown)
            {
                list[source] = target;
            }
        }

        public int AddNode(Complex[] point, List<Complex[]> solutions)
        {
            Points.Add(point);
            Solutions.Add(solutions);
            return Points.Count - 1;
        }

        public int AddEdge(int a, int b)
        {
            Edges.Add((a, b));
            _matching.Add(([], []));
            return Edges.Count - 1;
        }

        /// <summary>A task for every edge at <paramref name="node"/> that has not matched solution <paramref name="index"/>.</summary>
        public void Enqueue(int node, int index, List<EdgeTask> pending)
        {
            for (var e = 0; e < Edges.Count; e++)
            {
                if (Edges[e].A == node || Edges[e].B == node)
                {
                    var forward = Edges[e].A == node;
                    if (Match(e, forward, index) == Unknown)
                    {
                        pending.Add(new EdgeTask(e, forward, index));
                    }
                }
            }
        }
    }

    /// <summary>
    /// Nodes the graph starts with: a triangle (one loop). Each added node is joined to the base point and the
    /// newest node (one more loop through the base for two edges). On the five-bus microgrid (seeds 1–5 and three
    /// seeds with large base solutions, loops of spread 1 to 16) this reached all 70 solutions with 750–2,360 segment tracks; starting from
    /// four nodes joined pairwise took 860–2,470, and joining each new node to every other one up to 7,200 (many
    /// loops through one far point mix no better than one). Joining new nodes to the two newest instead, loops
    /// drift away from the base with the growing spread and stop encircling the branch points near it: the
    /// two-bus line then stayed at one of its two solutions at some seeds.
    /// </summary>
    private const int InitialNodes = 3;

    /// <summary>
    /// Searches a homotopy graph (Duff et al. 2019): nodes are the base point and random complex parameter points,
    /// joined pairwise by straight segments. Every solution known at a node is carried along every edge at that
    /// node whose matching does not yet hold it; an endpoint not known at the far node is a new solution there,
    /// carried on in turn. A loop of the graph thus needs no track of its own: each edge is tracked at most once
    /// per solution pair, in either direction, and solutions found at any node spread to all. When no edge has
    /// anything left to carry, the trace test on the base fiber decides; otherwise a node joined to the base point
    /// and the newest node adds a loop, until the expected count,
    /// a passed trace test, the stopping rule, or the loop limit. With an expected count, after the first rest the
    /// node is added as soon as few tracks are left (see <see cref="Carrier"/>) wherever the rest would add it: below
    /// the count, the stall and loop limits not reached. <paramref name="solutions"/> is the base node's list and
    /// grows in place; the carrier's merge order keeps the search independent of thread counts.
    /// </summary>
    private GraphPhase RunGraph(
        PolynomialSystem system, CompiledSystem projective, ProjectiveChart chart, Complex[] basis, List<Complex[]> solutions,
        Func<List<Complex[]>, bool> complete, SeededRandom random)
    {
        var graph = new HomotopyGraph();
        var pending = new List<EdgeTask>();
        graph.AddNode(basis, solutions);
        for (var k = 1; k < InitialNodes; k++)
        {
            AddJoinedNode(graph, NewPoint(basis, random, LoopSpread), pending, Enumerable.Range(0, k));
        }

        using var carrier = new Carrier(this, graph, projective, chart, () => complete(solutions));
        var stall = 0;
        var countAtLastRest = 0;
        var countAtLastTrace = 0;
        var addedLoops = 0;
        var trace = (TraceTestResult?)null;
        var skipped = (string?)null;
        var traceTest = new TraceTest(system, _solve, _options.TraceTolerance);

        // The trace test draws its slices from a stream of its own, so whether and how often it runs (an expected
        // count skips it) does not change the points the search adds.
        var traceRandom = new SeededRandom(random.NextUInt64());
        var done = false;
        while (true)
        {
            if (pending.Count > 0 && !done)
            {
                carrier.Carry(pending);
                done = carrier.Done;
            }

            done = done || complete(solutions);
            if (done)
            {
                stall = solutions.Count > countAtLastRest ? 0 : stall;
                break;
            }

            // Nothing left to carry: the graph's loops have closed the base fiber under their monodromy.
            stall = solutions.Count > countAtLastRest ? 0 : stall + addedLoops;
            countAtLastRest = solutions.Count;
            if (_options.ExpectedRootCount is { } wanted && carrier.Extend is null)
            {
                carrier.Extend = created =>
                {
                    // Below the expected count the search adds a node at rest unless the stopping rule or the loop
                    // limit would end it there; when neither can, the node is added now.
                    var period = solutions.Count > countAtLastRest ? 0 : stall + addedLoops;
                    if (solutions.Count >= wanted || period >= _options.StallLoops || graph.Edges.Count - graph.Points.Count + 1 >= _options.MaxLoops)
                    {
                        return false;
                    }

                    stall = period;
                    countAtLastRest = solutions.Count;
                    addedLoops = AddJoinedNode(graph, NewPoint(basis, random, LoopSpread), created, [0, graph.Points.Count - 1]) - 1;
                    return true;
                };
            }

            // The trace test (two tracks per solution) can end the search. A failure means solutions are missing or
            // that the test does not apply (points of the fiber at infinity on the moving slice); the stopping rule
            // then decides. The verdict changes only with the fiber, so it is not repeated on the same one. Below an
            // expected count it cannot pass unless the count is wrong, so it waits until the stopping rule would end
            // the search without it (on the five-bus microgrid with the count 70 that saved 0–372 trace paths a solve).
            var belowExpected = _options.ExpectedRootCount is { } goal && solutions.Count < goal && stall < _options.StallLoops;
            if (_options.TraceTest && solutions.Count != countAtLastTrace && !belowExpected)
            {
                countAtLastTrace = solutions.Count;
                (trace, skipped) = traceTest.Run(basis, solutions, traceRandom);
                if (trace is { Passed: true })
                {
                    break;
                }
            }

            var loops = graph.Edges.Count - graph.Points.Count + 1;
            var patience = trace is { Passed: false } ? TraceFailurePatience * _options.StallLoops : _options.StallLoops;
            if (stall >= patience || loops >= _options.MaxLoops)
            {
                break;
            }

            // The new node joins the base point and the newest node: a triangle through the base, like a fresh loop
            // from it, for two edges instead of three.
            addedLoops = AddJoinedNode(graph, NewPoint(basis, random, LoopSpread), pending, [0, graph.Points.Count - 1]) - 1;
        }

        return new GraphPhase(graph.Points.Count, graph.Edges.Count, carrier.Tracks, carrier.Failed, stall, trace, skipped, traceTest.PathsTracked);
    }

    /// <summary>
    /// Adds a node joined to <paramref name="others"/>, with tasks for every solution known at them, the largest
    /// first; returns the edges added.
    /// </summary>
    /// <remarks>
    /// The solutions a search finds last are mostly the largest at the base point, and loops exchange them mostly
    /// with other large ones: carried first around a new loop, these reach a missing solution sooner, and the search
    /// ends sooner at an expected count (five-bus microgrid, count 70, one thread: seeds 1–60 56,599 → 55,501 segment
    /// tracks, seeds 61–150 90,615 → 87,712, the tracks of the last loop −11 % and −19 %; the smallest first: +1.4 %).
    /// The graph at rest does not depend on the order.
    /// </remarks>
    private static int AddJoinedNode(HomotopyGraph graph, Complex[] point, List<EdgeTask> pending, IEnumerable<int> others)
    {
        var node = graph.AddNode(point, []);
        var joined = 0;
        foreach (var other in others)
        {
            var edge = graph.AddEdge(other, node);
            joined++;
            var known = graph.Solutions[other];
            var sizes = known.Select(x => PathTracker.MaxNorm(x)).ToArray();
            foreach (var i in Enumerable.Range(0, known.Count).OrderByDescending(i => sizes[i]))
            {
                pending.Add(new EdgeTask(edge, true, i));
            }
        }

        return joined;
    }

    /// <summary>
    /// An end whose condition number in the edge's chart (estimated from the refining Newton step's factors, no
    /// further factorization) is below this fraction of the singular limit is well conditioned without the
    /// chart-independent estimate. That estimate is there for the opposite case: regular solutions with large
    /// coordinates in the chart, which the chart's own row makes look singular (see
    /// <c>PathTracker.ProjectiveCondition</c>). Row equilibration, its other difference, is within a factor of the
    /// dimension of the best row scaling (van der Sluis 1969); the thousandfold margin leaves every end near the limit
    /// to the chart-independent estimate.
    /// Five-bus microgrid, count 70, seeds 1–60 on one thread: the same graphs, 2,521–2,594 → 2,477–2,493 ms.
    /// </summary>
    private const double ChartConditionShortcut = 1e-3;

    /// <summary>
    /// Carries <paramref name="start"/> along the edge whose homotopy <paramref name="tracker"/> tracks (from its
    /// first node at t = 0 to its second at t = 1), forward or back; null when the track fails or ends at a point
    /// the graph cannot use.
    /// </summary>
    private Complex[]? AlongEdge(PathTracker tracker, Complex[] start, bool forward, ProjectiveChart chart)
    {
        var x = new Complex[start.Length + 1];
        chart.Lift(start, x);
        var (from, to) = forward ? (Complex.Zero, Complex.One) : (Complex.One, Complex.Zero);
        if (!tracker.Track(x, from, to, _edgeTracker).Completed)
        {
            return null;
        }

        // Refine in the chart, where solutions with large coordinates stay well scaled, and judge the point with
        // a chart-independent, row-equilibrated condition number; only then leave the chart. One Newton step: the
        // corrector left the end within 1e-8 of the path, so one step lands at rounding level (quadratic
        // convergence); a second only confirmed it (five-bus microgrid, seeds 1–30, one thread: the same graphs,
        // 1,459–1,468 → 1,413–1,423 ms). Most ends are judged from that step's factors already
        // (ChartConditionShortcut).
        tracker.Refine(x, to, 1, 1e-15, out var chartCondition);
        if (Complex.Abs(x[0]) <= _solve.Endgame.InfinityThreshold * PathTracker.MaxNorm(x)
            || !(chartCondition <= ChartConditionShortcut * _solve.Endgame.SingularConditionLimit
                || tracker.ProjectiveCondition(x, to) <= _solve.Endgame.SingularConditionLimit))
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
    /// Edges are tracked with longer steps than fibers: up to the whole segment, a looser predictor tolerance. Every
    /// endpoint is refined at its node and must be finite and well conditioned there, so a path that jumps still ends
    /// at a solution of that node's fiber: at worst a known one (a wasted track, or a matching the graph holds
    /// wrongly, which later loops make up for), never a false one. On the five-bus microgrid (seeds 1–6, expected
    /// count 70) the graphs came out the same with 6 % fewer factorizations. The first step comes from
    /// the start's tangent (the path moving about a tenth of its size): with a fixed first step of a quarter segment,
    /// 1.5 of the 4.8 rejected steps a track were first steps; over seeds 1–12 on one thread 668 → 632 ms, the same
    /// graphs. Steps use the Hermite predictor (two factorizations a step instead of Runge–Kutta's four plus the
    /// corrector's) at thirty times the solver's predictor tolerance: over seeds 1–12 and 13–30 on one thread 3–6 %
    /// faster than Runge–Kutta at ten times (534 → 508 ms, 988–996 → 936–955 ms), the same root counts; Hermite at ten
    /// or a hundred times, Runge–Kutta at thirty or a hundred, and looser contraction or correction bounds were no
    /// better.
    /// </summary>
    private static TrackerOptions EdgeTracker(TrackerOptions solver) => solver with
    {
        InitialStepSize = Math.Max(solver.InitialStepSize, 0.25),
        MaxStepSize = 1.0,
        Predictor = Predictor.Hermite,
        PredictorTolerance = 30 * solver.PredictorTolerance,
        InitialStepFromTangent = 0.1,
    };

    /// <summary>
    /// A node's spread relative to the base point (each parameter moves by this times 1 + its size times a complex
    /// Gaussian). Wide loops encircle more branch points than narrow ones and mix the solutions faster, at a little
    /// more cost a track. On the five-bus microgrid with the count 70, seeds 1–12, in factorizations against total
    /// degree's: spread 4 for every node gave an aggregate ratio of 2.26 (worst seed 1.46); spread 1 doubling with
    /// each added node that found nothing, up to 16, 1.83 (worst 0.99); spread 2, 4 or 8 doubling alike 1.91, 2.22 and
    /// 2.02; spread 6 doubling up to 24, 2.11. Spread 0.5 doubling was worse than 1 over seeds 1–6.
    /// </summary>
    private const double LoopSpread = 4;

    private static Complex[] NewPoint(Complex[] basis, SeededRandom random, double spread)
    {
        var point = new Complex[basis.Length];
        for (var k = 0; k < basis.Length; k++)
        {
            point[k] = basis[k] + (spread * (1 + basis[k].Magnitude) * random.NextComplexGaussian());
        }

        return point;
    }

    /// <summary>(p₀, q₀) with q₀ = −F(x₀; p₀).</summary>
    private Complex[] Augment(Complex[] x0, Complex[] parameters)
    {
        var compiled = _system.Compile();
        var values = new Complex[_system.Equations.Count];
        compiled.Evaluate(x0, parameters, values, compiled.CreateWorkspace());
        return [.. parameters, .. values.Select(v => -v)];
    }

    /// <summary>max |aᵢ − bᵢ| ≤ tolerance · max(1, max |aᵢ|), compared in squares.</summary>
    private static bool Close(ReadOnlySpan<Complex> a, ReadOnlySpan<Complex> b, double tolerance)
    {
        var scale = 1.0;
        var distance = 0.0;
        for (var i = 0; i < a.Length; i++)
        {
            var (re, im) = (a[i].Real - b[i].Real, a[i].Imaginary - b[i].Imaginary);
            distance = Math.Max(distance, (re * re) + (im * im));
            scale = Math.Max(scale, (a[i].Real * a[i].Real) + (a[i].Imaginary * a[i].Imaginary));
        }

        return distance <= tolerance * tolerance * scale;
    }
}
