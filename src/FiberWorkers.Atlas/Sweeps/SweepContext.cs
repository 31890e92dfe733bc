using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Crossings;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;

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
        Crossings = new CrossingFinder(
            Lines, new FiberSolver(Lines.Folds, single), foldStart, new FiberSolver(Lines.Passages, single), passageStart, family.Unknowns.Count);
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
        var foldStart = Obtain(
            "folds",
            () => StartFiberFactory.Create(lines.Folds, FoldHash(family.ContentHash, options), null, StartFiberMethod.Auto, solve));
        var passageStart = Obtain(
            "passages",
            () => StartFiberFactory.Create(lines.Passages, PassageHash(family.ContentHash, options), null, StartFiberMethod.Auto, solve));
        return new SweepContext(family, options, familyStart, foldStart, passageStart, decisions);
    }

    /// <summary>The hash under which a family's fold-system start fiber is kept (the charts depend on the seed).</summary>
    public static string FoldHash(string familyHash, SweepOptions options) => $"{familyHash}/folds/{options.Seed}";

    /// <summary>The hash under which a family's passage-system start fiber is kept.</summary>
    public static string PassageHash(string familyHash, SweepOptions options) => $"{familyHash}/passages/{options.Seed}";
}
