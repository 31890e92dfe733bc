using System.CommandLine;
using System.Globalization;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Cli.Output;

namespace FiberWorkers.Cli.Commands;

/// <summary><c>fiber label FILE --at P=..,.. [--model ..] [--json]</c>: the real count the atlas predicts at a point.</summary>
internal static class LabelCommand
{
    public static Command Create(TextWriter output)
    {
        var atlas = new AtlasArguments();
        var choice = new ClassifierChoice();
        var at = new Option<string?>("--at") { Description = "The parameter point, e.g. P2=0.3,P3=-0.1,P4=0.2.", Required = true };
        var version = AtlasArguments.VersionOption();
        var json = new Option<bool>("--json") { Description = "Print one JSON object." };
        var command = new Command("label", "Predict the number of real solutions at a point from an atlas, and show the nearest sample.");
        atlas.AddTo(command);
        choice.AddTo(command);
        command.Options.Add(at);
        command.Options.Add(version);
        command.Options.Add(json);
        command.SetAction(parse =>
        {
            using var store = atlas.Open(parse);
            var snapshot = atlas.Load(parse, store, parse.GetValue(version));
            var source = Path.GetFileName(parse.GetValue(atlas.File)!);
            var point = ParameterPoint.Parse(parse.GetValue(at), snapshot.Family);
            var samples = SampleSet.From(snapshot);
            var classifier = choice.Create(parse, store, snapshot, samples, source);
            var normalized = new double[point.Length];
            samples.Normalize(point, normalized);
            var label = classifier.Classify(normalized);
            var nearest = classifier as NearestNeighbourClassifier ?? new NearestNeighbourClassifier(samples, 1);
            var (index, squared) = nearest.Tree.Nearest(normalized);
            var sample = samples.Samples[index];
            var inside = snapshot.Family.Parameters.Select((p, k) => p.Contains(point[k])).All(x => x);
            if (parse.GetValue(json))
            {
                JsonOutput.Write(output, writer =>
                {
                    writer.WriteStartObject();
                    writer.WriteNumber("label", label);
                    writer.WriteString("model", classifier.Name);
                    writer.WriteNumber("atlasVersion", snapshot.Version.Version);
                    writer.WriteBoolean("insideBox", inside);
                    writer.WriteStartObject("nearest");
                    for (var k = 0; k < point.Length; k++)
                    {
                        writer.WriteNumber(snapshot.Family.Parameters[k].Name, sample.Point[k]);
                    }

                    writer.WriteEndObject();
                    writer.WriteNumber("distance", Math.Sqrt(squared));
                    writer.WriteNumber("nearestLabel", sample.Label);
                    writer.WriteString("nearestKind", AtlasContent.KindName(sample.Kind));
                    writer.WriteString("nearestTile", samples.Tiles[index]);
                    writer.WriteEndObject();
                });
            }
            else
            {
                output.WriteLine($"at          {ParameterPoint.Format(snapshot.Family, point)}{(inside ? string.Empty : "  (outside the atlas box: extrapolated)")}");
                output.WriteLine($"label       {label} real solutions (model {classifier.Name}, atlas version {snapshot.Version.Version})");
                output.WriteLine(string.Create(
                    CultureInfo.InvariantCulture,
                    $"nearest     {ParameterPoint.Format(snapshot.Family, [.. sample.Point])}: {sample.Label} real, {AtlasContent.KindName(sample.Kind)} sample in tile {samples.Tiles[index]}, distance {Math.Sqrt(squared):G4} (box-normalized)"));
                output.WriteLine(FiberOutput.Caution);
            }

            return CommandLine.Success;
        });
        return command;
    }
}
