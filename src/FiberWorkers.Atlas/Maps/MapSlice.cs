using System.Globalization;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using Google.Protobuf.Collections;

namespace FiberWorkers.Atlas.Maps;

/// <summary>
/// The 2-D slice a map shows: two axis parameters over their box, and every other parameter fixed with a slab of
/// half-width one level-0 tile around its value, so that the slice shows the samples a sweep put near it.
/// Invalid axis names and fixed values are input errors named after the options that carry them.
/// </summary>
internal sealed class MapSlice
{
    private MapSlice(int xIndex, int yIndex, IReadOnlyList<ParameterBox> box, IReadOnlyList<(int Axis, MapFixedParameter Parameter)> fixedParameters)
    {
        XIndex = xIndex;
        YIndex = yIndex;
        X = new MapAxis(box[xIndex].Name, box[xIndex].Low, box[xIndex].High);
        Y = new MapAxis(box[yIndex].Name, box[yIndex].Low, box[yIndex].High);
        Dimension = box.Count;
        FixedParameters = fixedParameters;
    }

    public int XIndex { get; }

    public int YIndex { get; }

    public MapAxis X { get; }

    public MapAxis Y { get; }

    public int Dimension { get; }

    public IReadOnlyList<(int Axis, MapFixedParameter Parameter)> FixedParameters { get; }

    /// <summary>Resolves the options against the snapshot's family and tiles.</summary>
    public static MapSlice Resolve(AtlasSnapshot snapshot, MapOptions options)
    {
        ArgumentNullException.ThrowIfNull(snapshot);
        ArgumentNullException.ThrowIfNull(options);
        var box = snapshot.Family.Parameters;
        var names = box.Select(p => p.Name).ToArray();
        if (box.Count < 2)
        {
            throw new InputException(
                snapshot.Family.Source, "parameters", $"a map needs two parameters; this family has {box.Count} ({string.Join(", ", names)}): use 'fiber export' instead");
        }

        var x = options.XAxis is { } xName ? IndexOf(xName, names, "--x") : -1;
        var y = options.YAxis is { } yName ? IndexOf(yName, names, "--y") : -1;
        if (x >= 0 && x == y)
        {
            throw new ArgumentException($"the x and y axes are the same parameter '{names[x]}'", nameof(options));
        }

        x = x >= 0 ? x : Enumerable.Range(0, names.Length).First(k => k != y);
        y = y >= 0 ? y : Enumerable.Range(0, names.Length).First(k => k != x);

        foreach (var (name, value) in options.Fixed.OrderBy(f => f.Key, StringComparer.Ordinal))
        {
            var index = IndexOf(name, names, "--fix");
            if (index == x || index == y)
            {
                throw new InputException("--fix", $"'{name}'", $"is an axis of the map ({(index == x ? "--x" : "--y")}); fix only the other parameters");
            }

            if (!double.IsFinite(value) || !box[index].Contains(value))
            {
                throw new InputException(
                    "--fix",
                    $"'{name}'",
                    string.Create(CultureInfo.InvariantCulture, $"the value {value:R} lies outside the box of {name}, [{box[index].Low:R}, {box[index].High:R}]"));
            }
        }

        var fixedParameters = new List<(int, MapFixedParameter)>();
        for (var k = 0; k < box.Count; k++)
        {
            if (k == x || k == y)
            {
                continue;
            }

            var value = options.Fixed.TryGetValue(names[k], out var given) ? given : 0.5 * (box[k].Low + box[k].High);
            fixedParameters.Add((k, new MapFixedParameter(names[k], value, TileWidth(snapshot, k))));
        }

        return new MapSlice(x, y, box, fixedParameters);
    }

    /// <summary>True when a point lies in the slab: within the half-width of every fixed value.</summary>
    public bool Contains(RepeatedField<double> point)
    {
        if (point.Count != Dimension)
        {
            return false;
        }

        foreach (var (axis, parameter) in FixedParameters)
        {
            if (!(Math.Abs(point[axis] - parameter.Value) <= parameter.HalfWidth))
            {
                return false;
            }
        }

        return true;
    }

    /// <summary>The full parameter point of a slice point: the axes' values and the fixed values.</summary>
    public void FullPoint(double x, double y, Span<double> point)
    {
        foreach (var (axis, parameter) in FixedParameters)
        {
            point[axis] = parameter.Value;
        }

        point[XIndex] = x;
        point[YIndex] = y;
    }

    /// <summary>The widest tile along an axis: a level-0 tile (refined tiles are halves of it).</summary>
    private static double TileWidth(AtlasSnapshot snapshot, int axis)
    {
        var width = 0.0;
        foreach (var tile in snapshot.Tiles)
        {
            if (axis < tile.High.Count && axis < tile.Low.Count)
            {
                width = Math.Max(width, tile.High[axis] - tile.Low[axis]);
            }
        }

        return width > 0 ? width : snapshot.Family.Parameters[axis].Width;
    }

    private static int IndexOf(string name, string[] names, string option)
    {
        var index = Array.IndexOf(names, name);
        return index >= 0
            ? index
            : throw new InputException(option, $"'{name}'", $"is not a parameter of this family{NameSuggester.Hint(name, names)}; parameters: {string.Join(", ", names)}");
    }
}
