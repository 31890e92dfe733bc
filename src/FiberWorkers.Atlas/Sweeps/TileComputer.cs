using FiberWorkers.Atlas.Sampling;
using FiberWorkers.Atlas.Tiles;
using FiberWorkers.Contracts.V1;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Atlas.Sweeps;

/// <summary>
/// Computes one tile: a pure function of (family content hash, tile key, seed, options). It draws its lines from
/// the tile's own seed, finds each line's real crossings, and samples each line boundary-aware; it runs on the
/// calling thread only, so any number of tiles can run in parallel without changing any result.
/// </summary>
public static class TileComputer
{
    /// <summary>
    /// The tile's result and the number of paths tracked for it (work done, not content). <paramref name="cancellation"/>
    /// is checked before each line (a worker whose caller gave up frees its thread).
    /// </summary>
    public static (TileResult Result, long PathsTracked) Compute(SweepContext context, TileKey key, CancellationToken cancellation = default)
    {
        ArgumentNullException.ThrowIfNull(context);
        var options = context.Options;
        var box = context.Family.Parameters;
        var m = box.Count;
        if (!key.FitsIn(options.Divisions))
        {
            throw new ArgumentException($"tile {key} lies outside the {string.Join('x', options.Divisions)} grid", nameof(key));
        }

        var (low, high) = key.Bounds(box, options.Divisions);
        var seed = SeededRandom.Derive(options.Seed, key.ToString());
        var random = new SeededRandom(seed);
        var result = new TileResult
        {
            FamilyHash = context.Family.ContentHash,
            TileKey = key.ToString(),
            Seed = seed,
            OptionsHash = OptionsHash(options),
        };
        result.Low.Add(low);
        result.High.Add(high);

        // Lines live in normalized coordinates (each axis of the box scaled to length 1), so directions and δ treat
        // the parameters alike whatever their units.
        var tileWidth = 1.0 / (options.Divisions.Max() * (double)(1L << key.Level));
        var delta = options.DeltaFraction * tileWidth;
        var sampler = new LineSampler(context.FamilySolver, context.FamilyStart, [.. box.Select(b => b.Width)]);
        var flags = new List<string>();
        long paths = 0;
        for (var line = 0; line < options.LinesPerTile; line++)
        {
            cancellation.ThrowIfCancellationRequested();
            var origin = new double[m];
            var direction = new double[m];
            var unit = new double[m];
            for (var k = 0; k < m; k++)
            {
                origin[k] = low[k] + ((high[k] - low[k]) * random.NextDouble());
            }

            var norm = 0.0;
            for (var k = 0; k < m; k++)
            {
                unit[k] = random.NextGaussian();
                norm += unit[k] * unit[k];
            }

            norm = Math.Sqrt(norm);
            for (var k = 0; k < m; k++)
            {
                unit[k] /= norm;
                direction[k] = unit[k] * box[k].Width;
            }

            var (sMin, sMax) = Clip(origin, direction, low, high);
            var (crossings, tracked) = context.Crossings.Find(origin, direction, sMin, sMax);
            paths += tracked;
            var tileLine = new TileLine { SMin = sMin, SMax = sMax, Folds = crossings.Count(c => c.IsBoundary) };
            tileLine.Origin.Add(origin);
            tileLine.Direction.Add(direction);
            result.Lines.Add(tileLine);
            foreach (var crossing in crossings)
            {
                var record = new Crossing { S = crossing.S, Kind = crossing.Kind, Line = line };
                for (var k = 0; k < m; k++)
                {
                    record.Point.Add(origin[k] + (crossing.S * direction[k]));
                }

                record.Solution.Add(crossing.Solution);
                if (sampler.Normal(crossing, origin, direction) is { } normal)
                {
                    record.Normal.Add(normal);
                }

                result.Crossings.Add(record);
            }

            var samples = sampler.Sample(line, origin, direction, sMin, sMax, crossings, delta, flags);
            result.Samples.Add(samples);
            paths += samples.Count * context.FamilyStart.RootCount;
        }

        result.Flags.Add(flags);
        return (result, paths);
    }

    /// <summary>SHA-256 (hex, 16 bytes) of the options' canonical text.</summary>
    public static string OptionsHash(SweepOptions options) =>
        Convert.ToHexStringLower(System.Security.Cryptography.SHA256.HashData(System.Text.Encoding.UTF8.GetBytes(options.CanonicalText)))[..32];

    /// <summary>The s-range of origin + s·direction inside [low, high] (the origin lies inside).</summary>
    internal static (double Min, double Max) Clip(double[] origin, double[] direction, double[] low, double[] high)
    {
        var sMin = double.NegativeInfinity;
        var sMax = double.PositiveInfinity;
        for (var k = 0; k < origin.Length; k++)
        {
            if (direction[k] == 0)
            {
                continue;
            }

            var a = (low[k] - origin[k]) / direction[k];
            var b = (high[k] - origin[k]) / direction[k];
            sMin = Math.Max(sMin, Math.Min(a, b));
            sMax = Math.Min(sMax, Math.Max(a, b));
        }

        return (sMin, sMax);
    }
}
