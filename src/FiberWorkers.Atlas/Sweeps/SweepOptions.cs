using System.Globalization;
using FiberWorkers.Solving.Fibers;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Atlas.Sweeps;

/// <summary>Settings of a sweep. Everything except <see cref="MaxDegreeOfParallelism"/> shapes the atlas content.</summary>
public sealed record SweepOptions
{
    /// <summary>Tiles per parameter axis at level 0 (one entry per parameter).</summary>
    public required IReadOnlyList<int> Divisions { get; init; }

    /// <summary>Lines drawn through each tile. Default 4.</summary>
    public int LinesPerTile { get; init; } = 4;

    /// <summary>Seed of every random choice; each tile derives its own from it. Default 1.</summary>
    public ulong Seed { get; init; } = 1;

    /// <summary>Near-boundary offset δ as a fraction of the tile's width (normalized coordinates). Default 0.01.</summary>
    public double DeltaFraction { get; init; } = 0.01;

    /// <summary>Refinement levels below level 0 for tiles that contain crossings. Default 0.</summary>
    public int RefineDepth { get; init; }

    /// <summary>Stop refining once this many samples exist (null: no limit). Default null.</summary>
    public long? SampleBudget { get; init; }

    /// <summary>How the family's start fiber is computed. Default auto.</summary>
    public StartFiberMethod StartMethod { get; init; } = StartFiberMethod.Auto;

    /// <summary>Threads computing tiles (each tile runs on one thread). Not part of the content. Default: all cores.</summary>
    public int MaxDegreeOfParallelism { get; init; } = Environment.ProcessorCount;

    /// <summary>Solver settings (seed and threads are set by the sweep).</summary>
    public SolveOptions Solve { get; init; } = SolveOptions.Default;

    /// <summary>The options that shape content, as canonical text (hashed into every tile and version).</summary>
    public string CanonicalText => string.Create(
        CultureInfo.InvariantCulture,
        $"sweep-v1;tiles={string.Join('x', Divisions)};lines={LinesPerTile};seed={Seed};delta={DeltaFraction:R};"
        + $"refine={RefineDepth};budget={SampleBudget?.ToString(CultureInfo.InvariantCulture) ?? "-"};start={StartMethod}");

    /// <summary>Checks the options against a family with <paramref name="parameterCount"/> parameters.</summary>
    public void Validate(int parameterCount)
    {
        if (Divisions.Count != parameterCount)
        {
            throw new ArgumentException($"{Divisions.Count} tile divisions given for {parameterCount} parameters");
        }

        if (Divisions.Any(d => d < 1 || d > 4096))
        {
            throw new ArgumentException("tile divisions must be between 1 and 4096 per axis");
        }

        ArgumentOutOfRangeException.ThrowIfLessThan(LinesPerTile, 1);
        ArgumentOutOfRangeException.ThrowIfGreaterThan(LinesPerTile, 10_000);
        if (!(DeltaFraction > 0 && DeltaFraction < 0.25))
        {
            throw new ArgumentException($"the near-boundary fraction must be in (0, 0.25), got {DeltaFraction}");
        }

        ArgumentOutOfRangeException.ThrowIfNegative(RefineDepth);
        ArgumentOutOfRangeException.ThrowIfGreaterThan(RefineDepth, 12);
    }
}
