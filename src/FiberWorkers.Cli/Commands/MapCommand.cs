using System.CommandLine;
using System.Globalization;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Maps;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber map FILE --out map.png [--x NAME --y NAME] [--fix NAME=VALUE,...] [--version V] [--width W --height H]</c>:
/// a PNG of a 2-D slice of an atlas version, regions colored by real count.
/// </summary>
internal static class MapCommand
{
    public static Command Create(TextWriter output)
    {
        var atlas = new AtlasArguments();
        var target = new Option<string>("--out") { Description = "The PNG file to write.", Required = true };
        var x = new Option<string?>("--x") { Description = "The parameter on the horizontal axis (default: the first)." };
        var y = new Option<string?>("--y") { Description = "The parameter on the vertical axis (default: the next one)." };
        var fix = new Option<string?>("--fix")
        {
            Description = "Values of the other parameters, e.g. P4=0.2,P5=-0.1 (default: the box centre); the map shows samples within one tile of them.",
        };
        var version = AtlasArguments.VersionOption();
        var width = new Option<int>("--width") { Description = "Image width in pixels.", DefaultValueFactory = _ => new MapOptions().Width };
        var height = new Option<int>("--height") { Description = "Image height in pixels.", DefaultValueFactory = _ => new MapOptions().Height };
        var model = new Option<string?>("--model")
        {
            Description = "Color the regions by a classifier's decisions on a fine grid: nn1, knn or net (default: the nearest sample in the slice).",
        };
        model.AcceptOnlyFromAmong("nn1", "knn", "net");
        var k = new Option<int>("--k") { Description = "Neighbours that vote for --model knn.", DefaultValueFactory = _ => 5 };
        var command = new Command("map", "Draw a 2-D slice of an atlas as a PNG: regions by real count, samples and crossings.");
        atlas.AddTo(command);
        foreach (var option in new Option[] { target, x, y, fix, version, width, height, model, k })
        {
            command.Options.Add(option);
        }

        command.SetAction(parse =>
        {
            var path = parse.GetValue(target)!;
            if (string.IsNullOrWhiteSpace(path))
            {
                throw new UsageException("--out needs a file name");
            }

            if (parse.GetValue(x) is { } xName && parse.GetValue(y) is { } yName && xName == yName)
            {
                throw new UsageException($"--x and --y are both '{xName}': choose two different parameters");
            }

            var options = new MapOptions
            {
                XAxis = parse.GetValue(x),
                YAxis = parse.GetValue(y),
                Fixed = ParseFixed(parse.GetValue(fix)),
                Width = Size(parse.GetValue(width), "--width"),
                Height = Size(parse.GetValue(height), "--height"),
            };
            if (Directory.Exists(path))
            {
                throw new InputException(path, string.Empty, "is a directory; --out names the PNG file to write");
            }

            MapImage map;
            using (var store = atlas.Open(parse))
            {
                var snapshot = atlas.Load(parse, store, parse.GetValue(version));
                if (parse.GetValue(model) is { } kind)
                {
                    var samples = SampleSet.From(snapshot);
                    var neighbours = parse.GetValue(k) is >= 1 and <= 64 ? parse.GetValue(k) : throw new UsageException("--k must be between 1 and 64");
                    RegionClassifier classifier = kind switch
                    {
                        "net" => NetworkClassifier.FromModel(
                            (ModelCatalog.Latest(store, snapshot.AtlasId, "net", Path.GetFileName(parse.GetValue(atlas.File)!))
                                ?? throw new InputException(Path.GetFileName(parse.GetValue(atlas.File)!), "--model net", "no network is stored in this atlas yet: run 'fiber learn FILE --model net' first")).Model,
                            Path.GetFileName(parse.GetValue(atlas.File)!)),
                        "knn" => new NearestNeighbourClassifier(samples, neighbours),
                        _ => new NearestNeighbourClassifier(samples, 1),
                    };
                    options = options with { Regions = new ClassifierRegions(classifier, snapshot.Family.Parameters) };
                }

                map = MapRenderer.Render(snapshot, options);
            }

            Write(path, map.Png);
            WriteText(output, path, map.Description);
            return CommandLine.Success;
        });
        return command;
    }

    /// <summary>
    /// <c>NAME=VALUE,NAME=VALUE</c>: syntax only (each item a name and a finite number, no name twice); the names
    /// are checked against the family by the map itself.
    /// </summary>
    internal static Dictionary<string, double> ParseFixed(string? text)
    {
        var values = new Dictionary<string, double>(StringComparer.Ordinal);
        if (string.IsNullOrWhiteSpace(text))
        {
            return values;
        }

        var items = text.Split(',', StringSplitOptions.TrimEntries);
        for (var i = 0; i < items.Length; i++)
        {
            var location = $"item {i + 1} '{items[i]}'";
            var equals = items[i].IndexOf('=', StringComparison.Ordinal);
            if (equals <= 0)
            {
                throw new InputException("--fix", location, "expected NAME=VALUE");
            }

            var name = items[i][..equals].Trim();
            if (!double.TryParse(items[i][(equals + 1)..].Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out var value) || !double.IsFinite(value))
            {
                throw new InputException("--fix", location, "the value is not a finite number");
            }

            if (!values.TryAdd(name, value))
            {
                throw new InputException("--fix", location, $"parameter '{name}' is given twice");
            }
        }

        return values;
    }

    private static void Write(string path, byte[] png)
    {
        var temporary = $"{path}.partial";
        try
        {
            var directory = Path.GetDirectoryName(Path.GetFullPath(path));
            if (!string.IsNullOrEmpty(directory))
            {
                Directory.CreateDirectory(directory);
            }

            File.WriteAllBytes(temporary, png);
            File.Move(temporary, path, overwrite: true);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or NotSupportedException)
        {
            try
            {
                File.Delete(temporary);
            }
            catch (Exception cleanup) when (cleanup is IOException or UnauthorizedAccessException or NotSupportedException)
            {
                // The write failure is the one to report.
            }

            throw new InputException(path, string.Empty, $"cannot write the image ({e.Message.TrimEnd('.')})");
        }
    }

    private static void WriteText(TextWriter output, string path, MapDescription map)
    {
        output.WriteLine($"map         {path} ({map.Width}x{map.Height}), atlas {map.AtlasId}, version {map.Version}");
        output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"axes        {map.X.Name} in [{map.X.Low:R}, {map.X.High:R}] (x), {map.Y.Name} in [{map.Y.Low:R}, {map.Y.High:R}] (y)"));
        if (map.Fixed.Count > 0)
        {
            output.WriteLine($"slice       {string.Join(", ", map.Fixed.Select(f => string.Create(CultureInfo.InvariantCulture, $"{f.Name} = {f.Value:R} ± {f.HalfWidth:R}")))}");
        }

        output.WriteLine($"samples     {map.SamplesShown} shown");
        output.WriteLine($"crossings   {(map.CrossingsShown.Count == 0 ? "none" : string.Join(", ", map.CrossingsShown.Select(c => $"{c.Value} {c.Key}")))} shown");
        output.WriteLine($"regions     by {map.Regions} on a {map.Grid.Columns}x{map.Grid.Rows} grid");
        foreach (var entry in map.Legend)
        {
            output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"  {entry.Label} real    {entry.RegionColor}, {entry.Samples} samples, {entry.AreaFraction:P1} of the slice"));
        }
    }

    private static int Size(int value, string option) =>
        value is >= MapOptions.MinimumSize and <= MapOptions.MaximumSize
            ? value
            : throw new UsageException($"{option} must be between {MapOptions.MinimumSize} and {MapOptions.MaximumSize} pixels, got {value}");
}
