namespace FiberWorkers.Atlas.Sweeps;

/// <summary>The result of a sweep: the committed atlas version and what it holds.</summary>
public sealed record SweepSummary
{
    /// <summary>The atlas the version belongs to.</summary>
    public required string AtlasId { get; init; }

    /// <summary>The committed version number.</summary>
    public required int AtlasVersion { get; init; }

    /// <summary>Tiles in the version.</summary>
    public required int Tiles { get; init; }

    /// <summary>Samples in the version.</summary>
    public required long Samples { get; init; }

    /// <summary>Crossings in the version.</summary>
    public required long Crossings { get; init; }

    /// <summary>Samples per label (real count).</summary>
    public required IReadOnlyDictionary<int, long> Labels { get; init; }

    /// <summary>Samples per kind (uniform, midpoint, near-boundary).</summary>
    public required IReadOnlyDictionary<string, long> Kinds { get; init; }

    /// <summary>Flags (inconsistencies) kept in the tiles.</summary>
    public required int Flags { get; init; }

    /// <summary>Hash of the version's content: family, options, every tile. Never of timestamps or threads.</summary>
    public required string ContentHash { get; init; }

    /// <summary>Tiles computed in this run (not resumed or shared).</summary>
    public int TilesComputed { get; init; }

    /// <summary>Paths tracked in this run.</summary>
    public long PathsTracked { get; init; }

    /// <summary>Wall time of this run.</summary>
    public TimeSpan Elapsed { get; init; }

    /// <summary>How the start fibers were obtained.</summary>
    public IReadOnlyList<string> StartFibers { get; init; } = [];
}
