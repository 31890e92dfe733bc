using System.CommandLine;
using System.Diagnostics;
using System.Globalization;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Cli.Output;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber learn FILE [--model nn1|knn|net] [--layers 64,64] [--epochs N] [--seed S]</c>: trains a region classifier
/// on an atlas version, reports validation accuracy per label and a confusion matrix, and stores it as a new version.
/// </summary>
internal static class LearnCommand
{
    public static Command Create(TextWriter output)
    {
        var atlas = new AtlasArguments();
        var choice = new ClassifierChoice();
        var layers = new Option<string>("--layers") { Description = "Hidden layer sizes of the network, e.g. 64,64.", DefaultValueFactory = _ => "64,64" };
        var epochs = new Option<int>("--epochs") { Description = "Most training epochs of the network.", DefaultValueFactory = _ => 300 };
        var seed = new Option<long>("--seed") { Description = "Seed of the split and the network's training.", DefaultValueFactory = _ => 1 };
        var (fourier, fourierScale) = FourierOptions();
        var holdout = new Option<double>("--holdout") { Description = "Share of the atlas's lines held out for validation.", DefaultValueFactory = _ => 0.2 };
        var version = AtlasArguments.VersionOption();
        var json = new Option<bool>("--json") { Description = "Print the result as one JSON object." };
        var command = new Command("learn", "Train a region classifier on an atlas and store it in the atlas as a new version.");
        atlas.AddTo(command);
        choice.AddTo(command);
        foreach (var option in new Option[] { layers, epochs, fourier, fourierScale, seed, holdout, version, json })
        {
            command.Options.Add(option);
        }

        command.SetAction(parse =>
        {
            var share = parse.GetValue(holdout);
            if (!(share > 0 && share < 0.9))
            {
                throw new UsageException($"--holdout must be in (0, 0.9), got {share}");
            }

            if (parse.GetValue(seed) < 0)
            {
                throw new UsageException("--seed must be non-negative");
            }

            var hidden = Layers(parse.GetValue(layers)!);
            var maxEpochs = parse.GetValue(epochs) is >= 1 and <= 100_000 ? parse.GetValue(epochs) : throw new UsageException("--epochs must be between 1 and 100000");
            var networkOptions = WithFourier(new NetworkOptions { Hidden = hidden, Epochs = maxEpochs, Seed = (ulong)parse.GetValue(seed) }, parse, fourier, fourierScale);
            using var store = atlas.Open(parse);
            var snapshot = atlas.Load(parse, store, parse.GetValue(version));
            var all = SampleSet.From(snapshot);
            if (all.Labels.Distinct().Count() < 2 && parse.GetValue(choice.Model) == "net")
            {
                throw new InputException(Path.GetFileName(parse.GetValue(atlas.File)!), string.Empty, "every sample has the same label: there is nothing for a network to learn");
            }

            var (kept, held) = all.SplitByLine(share, (ulong)parse.GetValue(seed));
            var training = all.Subset(kept);
            var validation = all.Subset(held);
            var clock = Stopwatch.StartNew();
            RegionClassifier classifier;
            ClassifierModel model;
            string description;
            var kind = parse.GetValue(choice.Model)!;
            if (kind == "net")
            {
                var options = networkOptions;
                var (network, history) = NetworkTrainer.Train(training.Points, training.Labels, training.Dimension, options);
                description = string.Create(
                    CultureInfo.InvariantCulture,
                    $"layers={string.Join(',', hidden)};fourier={options.FourierFeatures}x{options.FourierScale};epochs={history.Count};seed={options.Seed};best validation loss {history.Min(h => h.ValidationLoss):E2}");
                var trained = new NetworkClassifier(network, description);
                classifier = trained;
                model = trained.ToModel(snapshot.Family.Parameters, snapshot.Version.Version);
            }
            else
            {
                var k = kind == "knn" ? choice.CheckedK(parse) : 1;
                var nearest = new NearestNeighbourClassifier(training, k);
                classifier = nearest;
                description = string.Create(CultureInfo.InvariantCulture, $"k={k};tree build {nearest.BuildTime.TotalMilliseconds:F1} ms, {nearest.Tree.MemoryBytes / 1024.0:F0} KiB");
                model = new ClassifierModel { FormatVersion = NetworkClassifier.FormatVersion, Kind = "knn", K = k, TrainedOnVersion = snapshot.Version.Version, Training = description };
                model.Low.Add(snapshot.Family.Parameters.Select(p => p.Low));
                model.High.Add(snapshot.Family.Parameters.Select(p => p.High));
            }

            var elapsed = clock.Elapsed;
            var labels = all.Labels.Distinct().Order().ToArray();
            var confusion = new long[labels.Length, labels.Length];
            for (var i = 0; i < validation.Count; i++)
            {
                var predicted = classifier.Classify(validation.Points.AsSpan(i * validation.Dimension, validation.Dimension));
                var column = Array.IndexOf(labels, predicted);
                confusion[Array.IndexOf(labels, validation.Labels[i]), column < 0 ? 0 : column]++;
            }

            var stored = ModelCatalog.Save(store, snapshot, model, description);
            var correct = Enumerable.Range(0, labels.Length).Sum(i => confusion[i, i]);
            if (parse.GetValue(json))
            {
                JsonOutput.Write(output, writer => WriteJson(writer, kind, stored, training.Count, validation.Count, correct, labels, confusion, elapsed));
            }
            else
            {
                output.WriteLine($"model       {kind} ({description})");
                output.WriteLine($"samples     {training.Count} for training, {validation.Count} held out (whole lines)");
                output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"time        {elapsed.TotalSeconds:F2} s"));
                output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"validation  {Ratio(correct, validation.Count):P2} correct"));
                for (var i = 0; i < labels.Length; i++)
                {
                    var row = Enumerable.Range(0, labels.Length).Sum(j => confusion[i, j]);
                    output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"  label {labels[i],2}: {Ratio(confusion[i, i], row),8:P2} of {row}"));
                }

                output.WriteLine("confusion   (rows: true label, columns: predicted)");
                output.WriteLine($"        {string.Join(string.Empty, labels.Select(l => $"{l,8}"))}");
                for (var i = 0; i < labels.Length; i++)
                {
                    output.WriteLine($"  {labels[i],4}  {string.Join(string.Empty, Enumerable.Range(0, labels.Length).Select(j => $"{confusion[i, j],8}"))}");
                }

                output.WriteLine($"stored      as atlas version {stored}");
            }

            return CommandLine.Success;
        });
        return command;
    }

    /// <summary><c>--fourier M</c> and <c>--fourier-scale S</c>, shared with <c>fiber study</c>.</summary>
    internal static (Option<int> Count, Option<double> Scale) FourierOptions() => (
        new Option<int>("--fourier") { Description = "Fourier features of the inputs for the network (0: plain coordinates).", DefaultValueFactory = _ => 0 },
        new Option<double>("--fourier-scale") { Description = "Spread of the Fourier features' frequencies.", DefaultValueFactory = _ => 2 });

    /// <summary>The network options with the checked Fourier-feature settings.</summary>
    internal static NetworkOptions WithFourier(NetworkOptions options, ParseResult parse, Option<int> count, Option<double> scale)
    {
        var features = parse.GetValue(count);
        var spread = parse.GetValue(scale);
        return options with
        {
            FourierFeatures = features is >= 0 and <= 1024 ? features : throw new UsageException($"--fourier must be between 0 and 1024, got {features}"),
            FourierScale = spread is > 0 and <= 100 ? spread : throw new UsageException($"--fourier-scale must be in (0, 100], got {spread}"),
        };
    }

    internal static int[] Layers(string text)
    {
        var parts = text.Split(',', StringSplitOptions.TrimEntries | StringSplitOptions.RemoveEmptyEntries);
        if (parts.Length is 0 or > 8)
        {
            throw new UsageException($"--layers '{text}': give 1 to 8 sizes, e.g. 64,64");
        }

        var sizes = new int[parts.Length];
        for (var i = 0; i < parts.Length; i++)
        {
            if (!int.TryParse(parts[i], NumberStyles.None, CultureInfo.InvariantCulture, out sizes[i]) || sizes[i] < 1 || sizes[i] > 1024)
            {
                throw new UsageException($"--layers '{text}': size {i + 1} must be an integer from 1 to 1024");
            }
        }

        return sizes;
    }

    private static double Ratio(long part, long whole) => whole == 0 ? double.NaN : (double)part / whole;

    private static void WriteJson(Utf8JsonWriter writer, string kind, int version, int training, int validation, long correct, int[] labels, long[,] confusion, TimeSpan elapsed)
    {
        writer.WriteStartObject();
        writer.WriteString("model", kind);
        writer.WriteNumber("atlasVersion", version);
        writer.WriteNumber("trainingSamples", training);
        writer.WriteNumber("validationSamples", validation);
        writer.WriteNumber("accuracy", Ratio(correct, validation));
        writer.WriteNumber("seconds", elapsed.TotalSeconds);
        writer.WriteStartObject("perLabel");
        for (var i = 0; i < labels.Length; i++)
        {
            var row = Enumerable.Range(0, labels.Length).Sum(j => confusion[i, j]);
            writer.WriteNumber(labels[i].ToString(CultureInfo.InvariantCulture), row == 0 ? -1 : Ratio(confusion[i, i], row));
        }

        writer.WriteEndObject();
        writer.WriteStartObject("confusion");
        for (var i = 0; i < labels.Length; i++)
        {
            writer.WriteStartObject(labels[i].ToString(CultureInfo.InvariantCulture));
            for (var j = 0; j < labels.Length; j++)
            {
                writer.WriteNumber(labels[j].ToString(CultureInfo.InvariantCulture), confusion[i, j]);
            }

            writer.WriteEndObject();
        }

        writer.WriteEndObject();
        writer.WriteEndObject();
    }
}
