using System.CommandLine;
using FiberWorkers.Atlas.Exports;
using FiberWorkers.Atlas.Stores;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber export FILE --format csv|parquet --out DIR [--version V] [--atlas-id ID]</c>: writes the samples and
/// crossings of one atlas version as <c>samples.csv|.parquet</c> and <c>crossings.csv|.parquet</c>.
/// </summary>
internal static class ExportCommand
{
    public static Command Create(TextWriter output)
    {
        var atlas = new AtlasArguments();
        var format = new Option<string>("--format") { Description = "csv or parquet.", Required = true };
        format.AcceptOnlyFromAmong("csv", "parquet");
        var directory = new Option<string>("--out") { Description = "The directory to write (created when absent).", Required = true };
        var version = AtlasArguments.VersionOption();
        var command = new Command("export", "Write the samples and crossings of an atlas version as CSV or Parquet tables.");
        atlas.AddTo(command);
        foreach (var option in new Option[] { format, directory, version })
        {
            command.Options.Add(option);
        }

        command.SetAction(async (parse, cancellation) =>
        {
            var target = parse.GetValue(directory)!;
            if (string.IsNullOrWhiteSpace(target))
            {
                throw new UsageException("--out needs a directory");
            }

            ExportResult result;
            using (var store = atlas.Open(parse))
            {
                var snapshot = atlas.Load(parse, store, parse.GetValue(version));
                result = parse.GetValue(format) == "parquet"
                    ? await ParquetExporter.ExportAsync(snapshot, target, cancellation)
                    : await CsvExporter.ExportAsync(snapshot, target, cancellation);
            }

            await output.WriteLineAsync($"atlas       {result.AtlasId}, version {result.Version}");
            foreach (var file in result.Files)
            {
                await output.WriteLineAsync($"{file.Table,-11} {file.Path} ({file.Rows} rows; columns {string.Join(", ", file.Columns)})");
            }

            return CommandLine.Success;
        });
        return command;
    }
}
