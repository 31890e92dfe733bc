using FiberWorkers.Solving.Endgames;
using FiberWorkers.Solving.Tracking;

namespace FiberWorkers.Solving.Fibers;

/// <summary>Settings of one solve.</summary>
public sealed record SolveOptions
{
    /// <summary>The defaults: seed 1, all cores.</summary>
    public static SolveOptions Default { get; } = new();

    /// <summary>Seed of every random choice (γ, the projective chart, the generic start point). Default 1.</summary>
    public int Seed { get; init; } = 1;

    /// <summary>Threads that track paths; 1 is the single-threaded mode for use inside workers. Default: all cores.</summary>
    public int MaxDegreeOfParallelism { get; init; } = Environment.ProcessorCount;

    /// <summary>Path tracker settings.</summary>
    public TrackerOptions Tracker { get; init; } = TrackerOptions.Default;

    /// <summary>Endgame settings.</summary>
    public EndgameOptions Endgame { get; init; } = EndgameOptions.Default;

    /// <summary>A total-degree solve with more paths than this is refused. Default 200,000.</summary>
    public long MaxPaths { get; init; } = 200_000;

    /// <summary>Two regular endpoints closer than this (relative) are the same solution. Default 1e-8.</summary>
    public double DuplicateTolerance { get; init; } = 1e-8;
}
