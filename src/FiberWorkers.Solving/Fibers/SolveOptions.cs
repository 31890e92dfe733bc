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

    /// <summary>
    /// Re-track every failed path once with <see cref="TrackerOptions.Tight"/> before the solve is judged. Worth it
    /// where a fast, loose <see cref="Tracker"/> is used and a lost path costs more than a slow one (the fold systems
    /// of a sweep: a lost path is a missed crossing). Default false.
    /// </summary>
    public bool RetrackFailed { get; init; }

    /// <summary>Two regular endpoints closer than this (relative) are the same solution. Default 1e-8.</summary>
    public double DuplicateTolerance { get; init; } = 1e-8;
}
