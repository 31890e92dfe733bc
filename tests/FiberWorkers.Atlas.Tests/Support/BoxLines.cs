using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Atlas.Tests.Support;

/// <summary>A line p(s) = origin + s·direction clipped to [SMin, SMax].</summary>
internal sealed record BoxLine(double[] Origin, double[] Direction, double SMin, double SMax)
{
    public double[] At(double s) => [.. Origin.Select((o, k) => o + (s * Direction[k]))];

    public static BoxLine Of(TileLine line) => new([.. line.Origin], [.. line.Direction], line.SMin, line.SMax);
}

/// <summary>Random lines through a whole parameter box, drawn like the sweep draws them (seeded, our own draws).</summary>
internal static class BoxLines
{
    /// <summary>
    /// Lines with a uniform origin in the box and a direction uniform on the sphere in box-normalized coordinates
    /// (scaled back by each axis width), clipped to the box.
    /// </summary>
    public static List<BoxLine> Draw(IReadOnlyList<ParameterBox> box, int count, int seed)
    {
        var random = new Random(seed);
        var lines = new List<BoxLine>(count);
        var m = box.Count;
        for (var i = 0; i < count; i++)
        {
            var origin = new double[m];
            var direction = new double[m];
            var norm = 0.0;
            for (var k = 0; k < m; k++)
            {
                origin[k] = box[k].Low + (box[k].Width * random.NextDouble());

                // Box–Muller: a standard normal per axis gives a direction uniform on the sphere.
                direction[k] = Math.Sqrt(-2 * Math.Log(1 - random.NextDouble())) * Math.Cos(2 * Math.PI * random.NextDouble());
                norm += direction[k] * direction[k];
            }

            for (var k = 0; k < m; k++)
            {
                direction[k] = direction[k] / Math.Sqrt(norm) * box[k].Width;
            }

            var (sMin, sMax) = Clip(origin, direction, [.. box.Select(b => b.Low)], [.. box.Select(b => b.High)]);
            lines.Add(new BoxLine(origin, direction, sMin, sMax));
        }

        return lines;
    }

    /// <summary>The s-range of origin + s·direction inside [low, high]: the sweep's own clipping.</summary>
    public static (double Min, double Max) Clip(double[] origin, double[] direction, double[] low, double[] high) =>
        TileComputer.Clip(origin, direction, low, high);
}
