using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Cluster.Coordination;

/// <summary>
/// Checks a tile result from a worker before it is merged: it must be the answer to the question asked (family,
/// tile, seed, options, bounds) and well formed (dimensions, labels, finite numbers). A worker that answers garbage
/// fails here and the tile goes elsewhere. A well-formed but numerically wrong answer cannot be caught without
/// recomputing the tile; workers run the same code as the embedded sweep.
/// </summary>
public static class TileChecks
{
    public static void Check(TileResult? result, SweepContext context, TileKey key, string worker)
    {
        ArgumentNullException.ThrowIfNull(context);
        string Where(string what) => $"worker {worker} answered tile {key} with {what}";
        if (result is null)
        {
            throw new InvalidTileException(Where("no result"));
        }

        var options = context.Options;
        var family = context.Family;
        var m = family.Parameters.Count;
        var n = family.Unknowns.Count;
        if (result.FamilyHash != family.ContentHash)
        {
            throw new InvalidTileException(Where($"family {Short(result.FamilyHash)}, expected {Short(family.ContentHash)}"));
        }

        if (result.TileKey != key.ToString())
        {
            throw new InvalidTileException(Where($"the result of tile '{Short(result.TileKey)}'"));
        }

        if (result.Seed != SeededRandom.Derive(options.Seed, key.ToString()))
        {
            throw new InvalidTileException(Where($"seed {result.Seed}, not the tile's own"));
        }

        if (result.OptionsHash != TileComputer.OptionsHash(options))
        {
            throw new InvalidTileException(Where($"options {Short(result.OptionsHash)}, not the sweep's"));
        }

        var (low, high) = key.Bounds(family.Parameters, options.Divisions);
        if (!result.Low.SequenceEqual(low) || !result.High.SequenceEqual(high))
        {
            throw new InvalidTileException(Where("bounds that are not the tile's"));
        }

        if (result.Lines.Count != options.LinesPerTile)
        {
            throw new InvalidTileException(Where($"{result.Lines.Count} lines, expected {options.LinesPerTile}"));
        }

        var maxLabel = context.FamilyStart.RootCount;
        for (var i = 0; i < result.Samples.Count; i++)
        {
            var sample = result.Samples[i];
            if (sample.Point.Count != m || !sample.Point.All(double.IsFinite))
            {
                throw new InvalidTileException(Where($"sample {i} at a point of {sample.Point.Count} values (or not finite)"));
            }

            if (sample.Label < 0 || sample.Label > maxLabel || sample.Solutions.Count != sample.Label * n || !sample.Solutions.All(double.IsFinite))
            {
                throw new InvalidTileException(Where($"sample {i} labeled {sample.Label} with {sample.Solutions.Count} solution values"));
            }

            if (sample.Kind == SampleKind.Unspecified || sample.Line < 0 || sample.Line >= options.LinesPerTile)
            {
                throw new InvalidTileException(Where($"sample {i} of kind {sample.Kind} on line {sample.Line}"));
            }
        }

        for (var i = 0; i < result.Crossings.Count; i++)
        {
            var crossing = result.Crossings[i];
            if (crossing.Point.Count != m || !crossing.Point.All(double.IsFinite) || crossing.Kind == CrossingKind.Unspecified
                || crossing.Line < 0 || crossing.Line >= options.LinesPerTile)
            {
                throw new InvalidTileException(Where($"crossing {i} malformed"));
            }
        }
    }

    private static string Short(string text) => text.Length <= 40 ? text : text[..40] + "…";
}
