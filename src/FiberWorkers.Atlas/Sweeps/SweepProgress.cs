namespace FiberWorkers.Atlas.Sweeps;

/// <summary>A progress report of a running sweep.</summary>
/// <param name="Stage">What is happening, e.g. "start fibers" or "level 0".</param>
/// <param name="TilesDone">Tiles finished so far (resumed ones included).</param>
/// <param name="TilesTotal">Tiles planned at the current level and before.</param>
/// <param name="Samples">Samples so far.</param>
/// <param name="Crossings">Crossings so far.</param>
/// <param name="TilesPerSecond">Tiles computed per second in this run.</param>
/// <param name="Remaining">Estimated time to finish the planned tiles, when known.</param>
public sealed record SweepProgress(string Stage, int TilesDone, int TilesTotal, long Samples, long Crossings, double TilesPerSecond, TimeSpan? Remaining);
