using System.Numerics;

namespace FiberWorkers.Solving.Fibers;

/// <summary>The result of solving one fiber: every path's end, the distinct solutions, and the real count.</summary>
public sealed class FiberSolution
{
    internal FiberSolution(
        string method, Complex[] parameters, IReadOnlyList<PathResult> paths, IReadOnlyList<FiberPoint> solutions, bool realParameters, int? rootCountBound = null)
    {
        RootCountBound = rootCountBound;
        Method = method;
        Parameters = parameters;
        Paths = paths;
        Solutions = solutions;
        var counts = new Dictionary<PathStatus, int>();
        foreach (PathStatus status in Enum.GetValues<PathStatus>())
        {
            counts[status] = 0;
        }

        foreach (var path in paths)
        {
            counts[path.Status]++;
        }

        StatusCounts = counts;
        RealCount = solutions.Count(s => s.IsReal);
        var singularFinite = paths.Any(p => p.Status == PathStatus.Singular);
        UncertainInfinityPaths = paths.Count(p => p.Status == PathStatus.AtInfinity && p.InfinityByDecay);
        RealCountCertified = realParameters
            && counts[PathStatus.Failed] == 0
            && !singularFinite
            && (UncertainInfinityPaths == 0 || solutions.Count == rootCountBound)
            && solutions.All(s => s.Certified);
    }

    /// <summary><c>total-degree</c> or <c>parameter</c> (or another method name).</summary>
    public string Method { get; }

    /// <summary>The parameter point of the fiber.</summary>
    public Complex[] Parameters { get; }

    /// <summary>Every path, in start-solution order.</summary>
    public IReadOnlyList<PathResult> Paths { get; }

    /// <summary>The distinct regular finite solutions.</summary>
    public IReadOnlyList<FiberPoint> Solutions { get; }

    /// <summary>Number of distinct regular finite solutions.</summary>
    public int RootCount => Solutions.Count;

    /// <summary>Number of real solutions among them.</summary>
    public int RealCount { get; }

    /// <summary>
    /// True only when the parameter point is real, no path failed, no path ended at a finite singular point, no
    /// path was judged at infinity from its decay alone (unless the solutions found reach the known root-count
    /// bound, so none can be missing), and every solution is a certified, distinct approximate zero whose reality
    /// is decided.
    /// </summary>
    public bool RealCountCertified { get; }

    /// <summary>The upper bound on the number of isolated solutions the solve was given (the start fiber's size for the parameter homotopy).</summary>
    public int? RootCountBound { get; }

    /// <summary>Paths judged at infinity from the decay of X₀ alone (see <see cref="PathResult.InfinityByDecay"/>).</summary>
    public int UncertainInfinityPaths { get; }

    /// <summary>How many paths ended with each status.</summary>
    public IReadOnlyDictionary<PathStatus, int> StatusCounts { get; }

    /// <summary>Paths tracked.</summary>
    public int PathsTracked => Paths.Count;

    /// <summary>The real solutions.</summary>
    public IEnumerable<FiberPoint> RealSolutions => Solutions.Where(s => s.IsReal);
}
