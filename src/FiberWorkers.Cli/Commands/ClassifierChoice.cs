using System.CommandLine;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Stores;

namespace FiberWorkers.Cli.Commands;

/// <summary>The --model and --k options, and the classifier they name over an atlas version.</summary>
internal sealed class ClassifierChoice
{
    public Option<string> Model { get; } = new("--model")
    {
        Description = "nn1 (nearest sample), knn (majority of --k nearest) or net (the stored feedforward network).",
        DefaultValueFactory = _ => "nn1",
    };

    public Option<int> K { get; } = new("--k") { Description = "Neighbours that vote for knn.", DefaultValueFactory = _ => 5 };

    public ClassifierChoice() => Model.AcceptOnlyFromAmong("nn1", "knn", "net");

    public void AddTo(Command command)
    {
        command.Options.Add(Model);
        command.Options.Add(K);
    }

    public int CheckedK(ParseResult parse)
    {
        var k = parse.GetValue(K);
        return k is >= 1 and <= 64 ? k : throw new UsageException($"--k must be between 1 and 64, got {k}");
    }

    /// <summary>The classifier for the snapshot; net needs a network stored by 'fiber learn --model net'.</summary>
    public RegionClassifier Create(ParseResult parse, IAtlasStore store, AtlasSnapshot snapshot, SampleSet samples, string source)
    {
        switch (parse.GetValue(Model))
        {
            case "net":
                var stored = ModelCatalog.Latest(store, snapshot.AtlasId, "net", source)
                    ?? throw new InputException(source, "--model net", "no network is stored in this atlas yet: run 'fiber learn FILE --model net' first");
                return NetworkClassifier.FromModel(stored.Model, source);
            case "knn":
                return new NearestNeighbourClassifier(samples, CheckedK(parse));
            default:
                return new NearestNeighbourClassifier(samples, 1);
        }
    }
}
