using System.Numerics;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Cluster.Contracts;

/// <summary>
/// The most a sweep with given settings may compute, known before it starts: level-0 tiles (the product of the
/// divisions), tiles refinement may add, and the fewest samples those tiles yield. Exact integers: settings within
/// the proto's ranges reach 4096^64 tiles, far beyond 64 bits.
/// </summary>
/// <param name="LevelZero">The level-0 tiles.</param>
/// <param name="Refined">The most tiles refinement may add.</param>
/// <param name="Tiles">Both together.</param>
/// <param name="Samples">Tiles × lines × <see cref="SamplesPerLine"/>.</param>
public readonly record struct SweepPlan(BigInteger LevelZero, BigInteger Refined, BigInteger Tiles, BigInteger Samples)
{
    /// <summary>
    /// The fewest samples a line yields: its own (uniform) point and the midpoint of its one interval; each crossing
    /// adds an interval midpoint and two near-boundary points.
    /// </summary>
    public const int SamplesPerLine = 2;

    /// <summary>
    /// The plan of settings whose fields are in range (<see cref="RequestChecks.Settings"/>). A refined tile has 2^m
    /// children in m parameters, so refinement to depth r adds at most level-0 × Σ_{l=1..r} 2^{m·l} tiles; a sample
    /// budget B stops refinement once B samples exist, and as every refined tile adds at least one sample, at most B
    /// tiles are added then.
    /// </summary>
    public static SweepPlan Of(SweepSettings settings)
    {
        ArgumentNullException.ThrowIfNull(settings);
        var levelZero = BigInteger.One;
        foreach (var division in settings.Divisions)
        {
            levelZero *= Math.Max(1, division);
        }

        var m = settings.Divisions.Count;
        var refined = BigInteger.Zero;
        for (var level = 1; level <= settings.RefineDepth; level++)
        {
            refined += levelZero << (m * level);
        }

        if (settings.SampleBudget > 0 && refined > settings.SampleBudget)
        {
            refined = settings.SampleBudget;
        }

        var tiles = levelZero + refined;
        return new SweepPlan(levelZero, refined, tiles, tiles * Math.Max(1, settings.LinesPerTile) * SamplesPerLine);
    }
}
