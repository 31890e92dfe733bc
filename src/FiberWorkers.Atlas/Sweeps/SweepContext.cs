using System.Numerics;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Atlas.Crossings;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;
using FiberWorkers.Solving.Tracking;

namespace FiberWorkers.Atlas.Sweeps;

/// <summary>
/// Everything a tile computation needs about its family, computed once per sweep: the compiled solvers and the
/// start fibers of the family and of its fold and passage families. Immutable and shared across threads.
/// </summary>
public sealed class SweepContext
{
    private SweepContext(FamilyDefinition family, SweepOptions options, StartFiber familyStart, StartFiber foldStart, StartFiber passageStart, IReadOnlyList<string> decisions)
    {
        Family = family;
        Options = options;
        FamilyStart = familyStart;
        FoldStart = foldStart;
        PassageStart = passageStart;
        Decisions = decisions;
        var single = options.Solve with { MaxDegreeOfParallelism = 1, Seed = (int)(options.Seed % int.MaxValue) };
        Lines = new LineFamilies(family.System, options.Seed);
        FamilySolver = new FiberSolver(family.System, single);
        var lines = CrossingSolve(single);
        Crossings = new CrossingFinder(
            Lines, new FiberSolver(Lines.Folds, lines), foldStart, new FiberSolver(Lines.Passages, lines), passageStart, family.Unknowns.Count);
    }

    /// <summary>The family being swept.</summary>
    public FamilyDefinition Family { get; }

    /// <summary>The sweep's options.</summary>
    public SweepOptions Options { get; }

    /// <summary>The family's generic fiber.</summary>
    public StartFiber FamilyStart { get; }

    /// <summary>The fold family's generic fiber.</summary>
    public StartFiber FoldStart { get; }

    /// <summary>The passage family's generic fiber.</summary>
    public StartFiber PassageStart { get; }

    /// <summary>How each start fiber's method was chosen (family, folds, passages).</summary>
    public IReadOnlyList<string> Decisions { get; }

    internal LineFamilies Lines { get; }

    internal FiberSolver FamilySolver { get; }

    internal CrossingFinder Crossings { get; }

    /// <summary>
    /// Builds the context, computing the three start fibers (on all cores, deterministically) unless
    /// <paramref name="cached"/> supplies them (from an atlas file or a coordinator).
    /// </summary>
    public static SweepContext Create(
        FamilyDefinition family, SweepOptions options, Func<string, StartFiber?>? cached = null, Action<string>? progress = null)
    {
        ArgumentNullException.ThrowIfNull(family);
        ArgumentNullException.ThrowIfNull(options);
        options.Validate(family.Parameters.Count);
        var lines = new LineFamilies(family.System, options.Seed);
        var solve = options.Solve with { Seed = (int)(options.Seed % int.MaxValue), MaxDegreeOfParallelism = options.MaxDegreeOfParallelism };
        var decisions = new List<string>();
        StartFiber Obtain(string kind, Func<StartFiberResult> compute)
        {
            if (cached?.Invoke(kind) is { } known)
            {
                decisions.Add($"{kind}: read from the atlas ({known.RootCount} solutions, {known.Provenance.Method})");
                return known;
            }

            progress?.Invoke($"computing the {kind} start fiber");
            var result = compute();
            decisions.Add($"{kind}: {result.Fiber.RootCount} solutions by {result.Fiber.Provenance.Method} ({result.Decision}); {result.Fiber.Provenance.Note}");
            return result.Fiber;
        }

        var familyStart = Obtain(
            "family",
            () => StartFiberFactory.Create(family.System, family.ContentHash, family.Parameters, options.StartMethod, solve, rootCountHint: family.RootCount));
        var homogeneousLength = family.Unknowns.Count + 1;
        var m = family.Parameters.Count;

        // A line family's start fiber: its generic fiber without the family's own ends at infinity, moved onto the fixed charts.
        StartFiberResult LineStart(
            PolynomialSystem system, string hash, Func<StartFiberResult, int, StartFiberResult> keep, Func<Complex[], Complex[]> charts)
        {
            var generic = keep(StartFiberFactory.Create(system, hash, null, StartFiberMethod.Auto, solve), homogeneousLength);
            return keep(OntoCharts(generic, new FiberSolver(system, solve), charts), homogeneousLength);
        }

        var foldStart = Obtain(
            "folds",
            () => LineStart(lines.Folds, FoldHash(family.ContentHash, options), WithoutEulerEnds, p => lines.FoldParameters(p[..m], p[m..(2 * m)])));
        var passageStart = Obtain(
            "passages",
            () => LineStart(lines.Passages, PassageHash(family.ContentHash, options), WithinChart, p => lines.PassageParameters(p[..m], p[m..(2 * m)])));
        return new SweepContext(family, options, familyStart, foldStart, passageStart, decisions);
    }

    /// <summary>
    /// The tracker of the line solves (fold and passage systems, one solve per line: nine tenths of a sweep's time).
    /// The Hermite predictor costs two factorizations a step against Runge–Kutta's four, and a looser predictor
    /// tolerance lets it take longer steps. On 200 random lines of the three-, four- and five-bus microgrids it took
    /// 0.7–0.8 of the default tracker's time from the same start fibers and found the same real crossings except on
    /// one five-bus line, where a path failed (step-size underflow, about one path in 10⁴ there): failed paths are
    /// therefore tracked again with the tight settings, so no path is dropped for speed.
    /// </summary>
    internal static SolveOptions CrossingSolve(SolveOptions options) => options with
    {
        Tracker = options.Tracker with { Predictor = Predictor.Hermite, PredictorTolerance = 5e-4 },
        RetrackFailed = true,
    };

    /// <summary>
    /// Moves a line family's start fiber to a point whose chart parameters (ℓ, and c for folds) are the sweep's fixed
    /// charts, keeping its line parameters (a₀, d₀). The start fiber is computed at a point generic in every parameter,
    /// charts included, but every line solve ends at the fixed charts: without this move each line's paths would move
    /// the charts too, and they take about a sixth more steps (four-bus microgrid: 41 against 34 a path). The new
    /// point is generic in (a, d), so the moved fiber is the generic fiber of the family with the charts fixed. Paths
    /// that leave it diverge there (solutions that exist only for other charts) and are dropped; if any path fails the
    /// fiber is kept where it was, complete but slower.
    /// </summary>
    private static StartFiberResult OntoCharts(StartFiberResult result, FiberSolver solver, Func<Complex[], Complex[]> target)
    {
        var fiber = result.Fiber;
        if (fiber.RootCount == 0)
        {
            return result;
        }

        var point = target(fiber.Parameters);
        if (point.AsSpan().SequenceEqual(fiber.Parameters))
        {
            return result;
        }

        var solution = solver.Solve(fiber, point);
        var failed = solution.StatusCounts[PathStatus.Failed];
        if (failed > 0)
        {
            var kept = $"{fiber.Provenance.Note}; not moved onto the sweep's charts ({failed} of {fiber.RootCount} paths failed)";
            return result with { Fiber = new StartFiber(fiber.FamilyHash, fiber.Unknowns, fiber.Parameters, fiber.Solutions, fiber.Provenance with { Note = kept }) };
        }

        var moved = solution.Solutions.Select(s => s.Values).ToArray();
        var note = $"{fiber.Provenance.Note}; moved onto the sweep's charts by a parameter homotopy ({moved.Length} of {fiber.RootCount} solutions stay finite)";
        return result with { Fiber = new StartFiber(fiber.FamilyHash, fiber.Unknowns, point, moved, fiber.Provenance with { Note = note }) };
    }

    /// <summary>
    /// Removes the fold family's ends at its own infinity. As X = t·X̂ escapes through the chart's excluded hyperplane
    /// (ℓ·X̂ → 0, t → ∞) the fold equations hold in the limit with v along X̂ itself, the Euler direction that every
    /// ∂F^h/∂X annihilates (∂F^h/∂X·X̂ = d·F^h(X̂) = 0); the joint homogenization converges to such ends too slowly to
    /// classify them, and they come out as large "regular" points that differ from run to run. A genuine fold's v is
    /// the fold direction made orthogonal to ℓ, never parallel to X (ℓ·v = 0 but ℓ·X = 1). On the four-bus microgrid
    /// every run shares 48 folds with |cos∠(v, X)| ≤ 0.99 and adds 6 to 9 ends with |cos| ≥ 0.99999.
    /// </summary>
    private static StartFiberResult WithoutEulerEnds(StartFiberResult result, int homogeneousLength) =>
        Keep(result, x => EulerCosine(x, homogeneousLength) <= EulerBound, "ends at the fold family's own infinity (v along the Euler direction of X)");

    /// <summary>
    /// Keeps the passage family's solutions whose X lies well inside the chart (‖X‖∞ ≤ 10³); its own ends at infinity
    /// escape the same way. A genuine point has ‖X‖ = 1/|ℓ·X̂| for a unit X̂ and a random complex ℓ with unit entries,
    /// above 10³ with a probability of about 10⁻⁶.
    /// </summary>
    private static StartFiberResult WithinChart(StartFiberResult result, int homogeneousLength) =>
        Keep(result, x => x.Take(homogeneousLength).Max(v => v.Magnitude) <= ChartBound, $"ends at the passage family's own infinity (‖X‖ above {ChartBound:G0})");

    private static StartFiberResult Keep(StartFiberResult result, Func<System.Numerics.Complex[], bool> keep, string what)
    {
        var fiber = result.Fiber;
        var kept = fiber.Solutions.Where(keep).ToArray();
        if (kept.Length == fiber.Solutions.Count)
        {
            return result;
        }

        var note = $"{fiber.Provenance.Note}; {fiber.Solutions.Count - kept.Length} {what} removed";
        return result with { Fiber = new StartFiber(fiber.FamilyHash, fiber.Unknowns, fiber.Parameters, kept, fiber.Provenance with { Note = note }) };
    }

    /// <summary>|cos∠(v, X)| for a fold solution (X first, then v, each of the given length).</summary>
    private static double EulerCosine(System.Numerics.Complex[] solution, int length)
    {
        var dot = System.Numerics.Complex.Zero;
        double x = 0, v = 0;
        for (var i = 0; i < length; i++)
        {
            dot += System.Numerics.Complex.Conjugate(solution[i]) * solution[length + i];
            x += solution[i].Magnitude * solution[i].Magnitude;
            v += solution[length + i].Magnitude * solution[length + i].Magnitude;
        }

        return dot.Magnitude / Math.Sqrt(x * v);
    }

    /// <summary>|cos∠(v, X)| above this marks an end at the fold family's own infinity.</summary>
    private const double EulerBound = 0.9999;

    /// <summary>‖X‖∞ above this in the chart ℓ·X = 1 marks an end at the passage family's own infinity.</summary>
    private const double ChartBound = 1e3;

    /// <summary>The hash under which a family's fold-system start fiber is kept (the charts depend on the seed).</summary>
    public static string FoldHash(string familyHash, SweepOptions options) => $"{familyHash}/folds/{options.Seed}";

    /// <summary>The hash under which a family's passage-system start fiber is kept.</summary>
    public static string PassageHash(string familyHash, SweepOptions options) => $"{familyHash}/passages/{options.Seed}";
}
