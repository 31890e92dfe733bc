using System.Numerics;

namespace FiberWorkers.Solving.StartFibers;

/// <summary>
/// The fiber at a generic complex parameter point p₀: all its regular solutions (the generic root count N),
/// from which the parameter homotopy reaches any other point with N paths. Records how it was obtained.
/// </summary>
public sealed class StartFiber
{
    /// <summary>Creates a start fiber.</summary>
    public StartFiber(
        string familyHash,
        IReadOnlyList<string> unknowns,
        Complex[] parameters,
        IReadOnlyList<Complex[]> solutions,
        StartFiberProvenance provenance)
    {
        ArgumentNullException.ThrowIfNull(familyHash);
        ArgumentNullException.ThrowIfNull(unknowns);
        ArgumentNullException.ThrowIfNull(parameters);
        ArgumentNullException.ThrowIfNull(solutions);
        ArgumentNullException.ThrowIfNull(provenance);
        foreach (var solution in solutions)
        {
            if (solution.Length != unknowns.Count)
            {
                throw new ArgumentException($"a solution has {solution.Length} entries, expected {unknowns.Count}", nameof(solutions));
            }
        }

        FamilyHash = familyHash;
        Unknowns = [.. unknowns];
        Parameters = parameters;
        Solutions = solutions;
        Provenance = provenance;
    }

    /// <summary>Content hash of the family this fiber belongs to.</summary>
    public string FamilyHash { get; }

    /// <summary>Names of the unknowns, in order.</summary>
    public IReadOnlyList<string> Unknowns { get; }

    /// <summary>p₀, the generic complex parameter point.</summary>
    public Complex[] Parameters { get; }

    /// <summary>The regular solutions at p₀.</summary>
    public IReadOnlyList<Complex[]> Solutions { get; }

    /// <summary>N, the generic root count found.</summary>
    public int RootCount => Solutions.Count;

    /// <summary>How the fiber was computed and how sure we are that it is complete.</summary>
    public StartFiberProvenance Provenance { get; }
}

/// <summary>How a start fiber was obtained.</summary>
/// <param name="Method"><c>total-degree</c> or <c>monodromy</c>.</param>
/// <param name="Seed">The seed of the solve.</param>
/// <param name="PathsTracked">Paths tracked to obtain it.</param>
/// <param name="Completeness">How complete it is known to be, e.g. <c>homotopy</c>, <c>expected-count</c>, <c>trace-test</c>, <c>stopping-rule</c>.</param>
/// <param name="Note">A sentence for people: what was checked and what was not.</param>
public sealed record StartFiberProvenance(string Method, ulong Seed, long PathsTracked, string Completeness, string Note);
