using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cli.Output;
using FiberWorkers.Solving.StartFibers;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber sweep FAMILY --atlas FILE [--tiles 6x6|auto] [--lines N] [--seed S] [--threads K] [--json]</c>: maps the
/// parameter box into regions by real count and commits a new atlas version; with <c>--coordinator URL</c> instead of
/// <c>--atlas</c> the sweep runs on a cluster and its summary has the same keys.
/// </summary>
internal static class SweepCommand
{
    public static Command Create(TextWriter output, TextWriter error)
    {
        var family = new FamilyArguments();
        var atlas = new Option<string?>("--atlas") { Description = "The atlas file (SQLite) to write; created when absent (not with --coordinator)." };
        var coordinator = new Option<string?>("--coordinator") { Description = "Run the sweep on a cluster: the coordinator's address, e.g. http://127.0.0.1:7400." };
        var tiles = new Option<string>("--tiles") { Description = "Tiles per axis, e.g. 6x6 or 6x6x6, or auto (from --budget).", DefaultValueFactory = _ => "auto" };
        var lines = new Option<int?>("--lines") { Description = "Lines per tile (default 4; with --budget and --tiles auto, from the budget)." };
        var seed = new Option<long>("--seed") { Description = "Seed of every random choice.", DefaultValueFactory = _ => 1 };
        var threads = new Option<int>("--threads") { Description = "Tiles computed at once (default: all cores).", DefaultValueFactory = _ => Environment.ProcessorCount };
        var delta = new Option<double>("--delta") { Description = "Near-boundary offset as a fraction of a tile.", DefaultValueFactory = _ => 0.01 };
        var refine = new Option<int>("--refine-depth") { Description = "Levels of refinement for tiles with crossings.", DefaultValueFactory = _ => 0 };
        var budget = new Option<long?>("--budget") { Description = "Sample budget: picks the tiles for --tiles auto and caps refinement." };
        var startMethod = new Option<string>("--start-method") { Description = "auto, total-degree or monodromy for the family's start fiber.", DefaultValueFactory = _ => "auto" };
        startMethod.AcceptOnlyFromAmong("auto", "total-degree", "monodromy");
        var json = new Option<bool>("--json") { Description = "Print the summary as one JSON object." };
        var command = new Command("sweep", "Map the parameter box into regions by real-solution count, with the boundary located, into an atlas.");
        family.AddTo(command);
        var security = new ClientSecurityArguments();
        foreach (var option in (Option[])[atlas, coordinator, tiles, lines, seed, threads, delta, refine, budget, startMethod, json, .. security.Options])
        {
            command.Options.Add(option);
        }

        command.SetAction(async (parse, cancellation) =>
        {
            var remote = parse.GetValue(coordinator);
            if ((remote is null) == (parse.GetValue(atlas) is null))
            {
                throw new UsageException(remote is null
                    ? "give --atlas FILE (or --coordinator URL to run the sweep on a cluster)"
                    : "--atlas names a local file; with --coordinator the cluster's store keeps the atlas");
            }

            var definition = family.Load(parse);
            if (definition.Parameters.Count == 0)
            {
                throw new InputException(definition.Source, "parameters", "a sweep needs at least one parameter with a box");
            }

            if (parse.GetValue(lines) is { } given)
            {
                Range(given, 1, 10_000, "--lines");
            }

            var (divisions, linesPerTile) = Layout(parse.GetValue(tiles)!, definition.Parameters.Count, parse.GetValue(lines), parse.GetValue(budget));
            var options = new SweepOptions
            {
                Divisions = divisions,
                LinesPerTile = linesPerTile,
                Seed = parse.GetValue(seed) >= 0 ? (ulong)parse.GetValue(seed) : throw new UsageException("--seed must be non-negative"),
                MaxDegreeOfParallelism = Range(parse.GetValue(threads), 1, 4096, "--threads"),
                DeltaFraction = parse.GetValue(delta) is > 0 and < 0.25 ? parse.GetValue(delta) : throw new UsageException("--delta must be in (0, 0.25)"),
                RefineDepth = Range(parse.GetValue(refine), 0, 12, "--refine-depth"),
                SampleBudget = parse.GetValue(budget) is { } b ? (b > 0 ? b : throw new UsageException("--budget must be positive")) : null,
                StartMethod = parse.GetValue(startMethod) switch
                {
                    "total-degree" => StartFiberMethod.TotalDegree,
                    "monodromy" => StartFiberMethod.Monodromy,
                    _ => StartFiberMethod.Auto,
                },
            };
            var printer = new ProgressPrinter(error, !Console.IsErrorRedirected && ReferenceEquals(error, Console.Error));
            SweepSummary summary;
            try
            {
                summary = remote is null
                    ? RunHere(parse.GetValue(atlas)!, definition, options, printer, cancellation)
                    : await ClusterSweep.RunAsync(ServeCommand.Url(remote, "--coordinator"), security.Resolve(parse, ServeCommand.Url(remote, "--coordinator"), "--coordinator"), definition, options, printer, cancellation).ConfigureAwait(false);
            }
            finally
            {
                printer.Finish();
            }

            if (parse.GetValue(json))
            {
                JsonOutput.Write(output, writer => AtlasOutput.WriteSummary(writer, summary));
            }
            else
            {
                foreach (var line in summary.StartFibers)
                {
                    output.WriteLine($"start fiber {line}");
                }

                AtlasOutput.WriteText(output, summary);
                output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"time        {summary.Elapsed.TotalSeconds:F1} s, {summary.TilesComputed} tiles computed, {summary.PathsTracked} paths"));
                output.WriteLine(FiberOutput.Caution);
            }

            return CommandLine.Success;
        });
        return command;
    }

    private static SweepSummary RunHere(string file, FamilyDefinition definition, SweepOptions options, ProgressPrinter printer, CancellationToken cancellation)
    {
        using var store = SqliteAtlasStore.Open(file);
        return new SweepRunner(store).Run(definition, options, printer, cancellation);
    }

    /// <summary>
    /// The tiles and lines per tile. With <c>--tiles auto</c>, a budget and no <c>--lines</c>: 4 tiles per axis and
    /// as many lines per tile as the budget needs at about five samples per line. A line's crossings come from one
    /// solve of the fold system over the whole line, clipped to its tile, so long lines in large tiles give more
    /// samples for the same work: on the four-bus microgrid 4.9 samples per line at 4×4×4 tiles against 3.1 at
    /// 11×11×11 (same budget, 1.5× the samples per second). Otherwise as <see cref="Divisions"/>.
    /// </summary>
    internal static (int[] Divisions, int Lines) Layout(string text, int parameters, int? lines, long? budget)
    {
        if (text == "auto" && lines is null && budget is { } samples)
        {
            var divisions = Enumerable.Repeat(4, parameters).ToArray();
            var tiles = divisions.Aggregate(1.0, (product, d) => product * d);
            var perTile = (int)Math.Clamp(Math.Ceiling(samples / (SamplesPerLongLine * tiles)), 1, 10_000);
            return (divisions, perTile);
        }

        var count = lines ?? DefaultLines;
        return (Divisions(text, parameters, count, budget), count);
    }

    /// <summary>Lines per tile when neither <c>--lines</c> nor a budget says otherwise.</summary>
    internal const int DefaultLines = 4;

    /// <summary>Samples a line through a 4-per-axis tile gives, about (uniform point, midpoints, near-boundary pairs).</summary>
    private const double SamplesPerLongLine = 5;

    /// <summary>"6x6" or "auto": auto spreads the budget at about four samples per line (4 tiles per axis without one).</summary>
    internal static int[] Divisions(string text, int parameters, int lines, long? budget)
    {
        if (text == "auto")
        {
            if (budget is not { } samples)
            {
                return [.. Enumerable.Repeat(4, parameters)];
            }

            // About four samples per line (uniform point, a midpoint or two, near-boundary pairs) in a typical tile.
            var tiles = Math.Max(1.0, samples / (4.0 * Math.Max(1, lines)));
            var perAxis = (int)Math.Clamp(Math.Round(Math.Pow(tiles, 1.0 / parameters)), 1, 4096);
            return [.. Enumerable.Repeat(perAxis, parameters)];
        }

        var parts = text.Split('x');
        if (parts.Length != parameters)
        {
            throw new UsageException($"--tiles '{text}' has {parts.Length} axes; this family has {parameters} parameters (e.g. {string.Join('x', Enumerable.Repeat(6, parameters))})");
        }

        var divisions = new int[parts.Length];
        for (var k = 0; k < parts.Length; k++)
        {
            if (!int.TryParse(parts[k], NumberStyles.None, CultureInfo.InvariantCulture, out divisions[k]) || divisions[k] < 1 || divisions[k] > 4096)
            {
                throw new UsageException($"--tiles '{text}': axis {k + 1} must be an integer from 1 to 4096");
            }
        }

        return divisions;
    }

    private static int Range(int value, int low, int high, string option) =>
        value >= low && value <= high ? value : throw new UsageException($"{option} must be between {low} and {high}, got {value}");
}
