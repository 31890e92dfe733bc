using System.CommandLine;
using System.Globalization;
using System.Text;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cli.Examples;
using FiberWorkers.Cli.Output;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber study FILE|FAMILY [--out DIR]</c>: the accuracy study of classifiers trained on each kind of sample and
/// tested on uniform, near-boundary and all samples. A family (file or --example) is swept first into DIR/study.db
/// with settings that give the study dense crossings.
/// </summary>
internal static class StudyCommand
{
    public static Command Create(TextWriter output, TextWriter error)
    {
        var input = new Argument<string?>("FILE") { Description = "An atlas file, or a family file to sweep first.", Arity = ArgumentArity.ZeroOrOne };
        var example = new Option<string?>("--example") { Description = "Sweep a bundled example first." };
        var outDirectory = new Option<string>("--out") { Description = "Directory for study.csv (and study.db when sweeping).", DefaultValueFactory = _ => "study" };
        var network = new Option<bool>("--network") { Description = "Also train and test the feedforward network (slower)." };
        var layers = new Option<string>("--layers") { Description = "Network hidden layers.", DefaultValueFactory = _ => "64,64" };
        var epochs = new Option<int>("--epochs") { Description = "Network epochs.", DefaultValueFactory = _ => 300 };
        var (fourier, fourierScale) = LearnCommand.FourierOptions();
        var tiles = new Option<string>("--tiles") { Description = "Tiles per axis for the sweep (auto: 8 per axis in 1-2 parameters, 4 in more).", DefaultValueFactory = _ => "auto" };
        var lines = new Option<int>("--lines") { Description = "Lines per tile for the sweep.", DefaultValueFactory = _ => 200 };
        var delta = new Option<double>("--delta") { Description = "Near-boundary offset (fraction of a tile) for the sweep.", DefaultValueFactory = _ => 0.1 };
        var seed = new Option<long>("--seed") { Description = "Seed of the sweep and the splits.", DefaultValueFactory = _ => 1 };
        var command = new Command("study", "Measure how the kind of training samples affects classifier accuracy near the discriminant locus.");
        command.Arguments.Add(input);
        foreach (var option in new Option[] { example, outDirectory, network, layers, epochs, fourier, fourierScale, tiles, lines, delta, seed })
        {
            command.Options.Add(option);
        }

        command.SetAction((parse, cancellation) =>
        {
            var directory = parse.GetValue(outDirectory)!;
            Directory.CreateDirectory(directory);
            var path = parse.GetValue(input);
            string atlasPath;
            if (path is not null && parse.GetValue(example) is not null)
            {
                throw new UsageException("give either a file or --example NAME, not both");
            }

            if (path is not null && IsAtlas(path))
            {
                atlasPath = path;
            }
            else
            {
                var family = path is not null ? FamilyReader.ReadFile(path)
                    : parse.GetValue(example) is { } name ? ExampleCatalog.Load(name)
                    : throw new UsageException("give an atlas file, a family file, or --example NAME");
                var m = family.Parameters.Count;
                var perAxis = m <= 2 ? 8 : 4;
                var options = new SweepOptions
                {
                    Divisions = parse.GetValue(tiles) == "auto" ? [.. Enumerable.Repeat(perAxis, m)] : SweepCommand.Divisions(parse.GetValue(tiles)!, m, parse.GetValue(lines), null),
                    LinesPerTile = parse.GetValue(lines) is >= 1 and <= 10_000 ? parse.GetValue(lines) : throw new UsageException("--lines must be between 1 and 10000"),
                    DeltaFraction = parse.GetValue(delta) is > 0 and < 0.25 ? parse.GetValue(delta) : throw new UsageException("--delta must be in (0, 0.25)"),
                    Seed = (ulong)Math.Max(0, parse.GetValue(seed)),
                };
                atlasPath = Path.Combine(directory, "study.db");
                using var sweepStore = SqliteAtlasStore.Open(atlasPath);
                var summary = new SweepRunner(sweepStore).Run(family, options, new ProgressPrinter(error, false), cancellation);
                output.WriteLine($"swept       {summary.Samples} samples ({string.Join(", ", summary.Kinds.Select(k => $"{k.Value} {k.Key}"))}) into {atlasPath}");
            }

            using var store = SqliteAtlasStore.Open(atlasPath, create: false);
            var snapshot = AtlasSnapshot.Load(store, Path.GetFileName(atlasPath));
            var study = new StudyOptions
            {
                Seed = (ulong)Math.Max(0, parse.GetValue(seed)),
                Network = parse.GetValue(network),
                NetworkOptions = LearnCommand.WithFourier(
                    new NetworkOptions { Hidden = LearnCommand.Layers(parse.GetValue(layers)!), Epochs = parse.GetValue(epochs) }, parse, fourier, fourierScale),
            };
            IReadOnlyList<StudyRow> rows;
            try
            {
                rows = AccuracyStudy.Run(SampleSet.From(snapshot), study);
            }
            catch (ArgumentException e)
            {
                throw new InputException(Path.GetFileName(atlasPath), string.Empty, e.Message);
            }

            var csv = new StringBuilder("classifier,training,training_size,test,test_size,correct,accuracy\n");
            foreach (var row in rows)
            {
                csv.Append(CultureInfo.InvariantCulture, $"{row.Classifier},{row.Training},{row.TrainingSize},{row.Test},{row.TestSize},{row.Correct},{row.Accuracy:R}\n");
            }

            var csvPath = Path.Combine(directory, "study.csv");
            File.WriteAllText(csvPath, csv.ToString());
            output.WriteLine($"family      {snapshot.Family.Name}, atlas version {snapshot.Version.Version}, {snapshot.Samples.Count} samples");
            output.WriteLine($"accuracy    (columns: test set; training sets of {rows[0].TrainingSize} samples from disjoint lines)");
            output.WriteLine($"  {"classifier",-10} {"trained on",-14} {string.Join(string.Empty, AccuracyStudy.TestSets.Select(t => $"{t,15}"))}");
            foreach (var group in rows.GroupBy(r => (r.Classifier, r.Training)))
            {
                var cells = AccuracyStudy.TestSets.Select(t => group.First(r => r.Test == t).Accuracy.ToString("P2", CultureInfo.InvariantCulture));
                output.WriteLine($"  {group.Key.Classifier,-10} {group.Key.Training,-14} {string.Join(string.Empty, cells.Select(c => $"{c,15}"))}");
            }

            output.WriteLine($"written     {csvPath}");
            return Task.FromResult(CommandLine.Success);
        });
        return command;
    }

    private static bool IsAtlas(string path)
    {
        if (!File.Exists(path))
        {
            throw new InputException(path, string.Empty, "no such file");
        }

        Span<byte> header = stackalloc byte[16];
        using var stream = File.OpenRead(path);
        return stream.Read(header) == 16 && header.SequenceEqual("SQLite format 3\0"u8);
    }
}
