using System.Globalization;
using System.Numerics;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.Monodromy;

namespace FiberWorkers.Solving.StartFibers;

/// <summary>Computes start fibers by total degree or monodromy, and chooses between them.</summary>
public static class StartFiberFactory
{
    /// <summary>
    /// Bézout numbers up to this are solved by total degree under <see cref="StartFiberMethod.Auto"/>: below it a
    /// total-degree solve costs well under a second, and monodromy's fixed costs (loops that find nothing, the
    /// completeness checks) do not pay off.
    /// </summary>
    public const int TotalDegreeThreshold = 128;

    /// <summary>
    /// The method <see cref="StartFiberMethod.Auto"/> picks, with the reason in words. Total degree tracks Π dᵢ
    /// paths, most of them ending at infinity through the expensive endgame; monodromy tracks about N·(loops + 1)·3
    /// short segments for a root count N that is usually far below Π dᵢ. Without a known N, the Bézout number decides.
    /// </summary>
    public static (StartFiberMethod Method, string Reason) Choose(PolynomialSystem system, int? rootCountHint)
    {
        ArgumentNullException.ThrowIfNull(system);
        var bezout = system.BezoutNumber;
        var text = bezout.ToString(CultureInfo.InvariantCulture);
        if (system.ParameterCount == 0 && bezout > TotalDegreeThreshold)
        {
            return (StartFiberMethod.Monodromy, $"Bézout number {text} above {TotalDegreeThreshold}: monodromy (with auxiliary constants) expected cheaper");
        }

        if (rootCountHint is { } hint && hint * 4 <= bezout && bezout > TotalDegreeThreshold / 4)
        {
            return (StartFiberMethod.Monodromy, $"expected root count {hint} is at most a quarter of the Bézout number {text}: monodromy expected cheaper");
        }

        return bezout <= TotalDegreeThreshold
            ? (StartFiberMethod.TotalDegree, $"Bézout number {text} is at most {TotalDegreeThreshold}: total degree is cheap")
            : (StartFiberMethod.Monodromy, $"Bézout number {text} above {TotalDegreeThreshold}: monodromy expected cheaper");
    }

    /// <summary>Computes a start fiber at a seeded generic complex point.</summary>
    public static StartFiberResult Create(
        PolynomialSystem system,
        string familyHash,
        IReadOnlyList<ParameterBox>? box,
        StartFiberMethod method,
        SolveOptions options,
        MonodromyOptions? monodromy = null,
        int? rootCountHint = null)
    {
        ArgumentNullException.ThrowIfNull(system);
        ArgumentNullException.ThrowIfNull(familyHash);
        ArgumentNullException.ThrowIfNull(options);
        if (!system.IsSquare)
        {
            throw new ArgumentException("the solver needs a square system", nameof(system));
        }

        var reason = method switch
        {
            StartFiberMethod.TotalDegree => "total degree (asked for)",
            StartFiberMethod.Monodromy => "monodromy (asked for)",
            _ => string.Empty,
        };
        if (method == StartFiberMethod.Auto)
        {
            (method, reason) = Choose(system, rootCountHint);
            reason = $"auto: {reason}";
        }

        if (method == StartFiberMethod.TotalDegree)
        {
            return new StartFiberResult(new FiberSolver(system, options).CreateStartFiber(familyHash, box), reason, null);
        }

        var point = FiberSolver.GenericPoint(system.ParameterCount, options.Seed, box, "start-fiber");
        var settings = (monodromy ?? MonodromyOptions.Default) with { ExpectedRootCount = rootCountHint ?? monodromy?.ExpectedRootCount };
        var (fiber, report) = new MonodromySolver(system, options, settings).Solve(familyHash, point);
        return new StartFiberResult(fiber, reason, report);
    }
}

/// <summary>A start fiber, why its method was chosen, and the monodromy report when monodromy computed it.</summary>
public sealed record StartFiberResult(StartFiber Fiber, string Decision, MonodromyReport? Monodromy);
