using System.CommandLine;
using System.Globalization;
using System.Text;
using System.Text.Json;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Learning;
using FiberWorkers.Atlas.Resolve;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Cli.Output;
using FiberWorkers.Solving.Certification;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// <c>fiber ask FILE --at P=..,.. [--json]</c> and <c>fiber ask FILE --points points.csv --out answers.csv|.json</c>:
/// the real solutions at points, by real-only tracking from the nearest solved sample, with a full solve as fallback.
/// </summary>
internal static class AskCommand
{
    public static Command Create(TextWriter output, TextWriter error)
    {
        var atlas = new AtlasArguments(fileOptional: true);
        var coordinator = new Option<string?>("--coordinator") { Description = "Ask a cluster instead of a file: the coordinator's address, e.g. http://127.0.0.1:7400." };
        var atlasName = new Option<string?>("--atlas") { Description = "With --coordinator: the atlas id (see 'fiber sweep --json' or 'fiber atlas --coordinator')." };
        var direct = new Option<bool>("--direct") { Description = "With --coordinator: send the ask straight to the worker the coordinator would pick." };
        var choice = new ClassifierChoice();
        var at = new Option<string?>("--at") { Description = "One parameter point, e.g. P2=0.3,P3=-0.1,P4=0.2." };
        var points = new Option<string?>("--points") { Description = "A CSV file of points: a header with the parameter names, one point per row." };
        var outFile = new Option<string?>("--out") { Description = "Where batch answers go: a .csv or .json file." };
        var json = new Option<bool>("--json") { Description = "Print the single answer as one JSON object." };
        var verify = new Option<string?>("--verify") { Description = "'full': also solve in full and compare with the real-only answer." };
        verify.AcceptOnlyFromAmong("full");
        var learn = new Option<bool>("--learn") { Description = "Keep points answered by a full solve as new samples (a new atlas version)." };
        var version = AtlasArguments.VersionOption();
        var command = new Command("ask", "The real solutions at points, from an atlas: real-only tracking from the nearest solved sample, certified.");
        atlas.AddTo(command);
        choice.AddTo(command);
        var security = new ClientSecurityArguments();
        foreach (var option in (Option[])[at, points, outFile, json, verify, learn, version, coordinator, atlasName, direct, .. security.Options])
        {
            command.Options.Add(option);
        }

        command.SetAction(async (parse, cancellation) =>
        {
            var single = parse.GetValue(at);
            var batch = parse.GetValue(points);
            if ((single is null) == (batch is null))
            {
                throw new UsageException("give either --at POINT or --points FILE.csv");
            }

            if (batch is not null && parse.GetValue(outFile) is null)
            {
                throw new UsageException("--points needs --out answers.csv or answers.json");
            }

            if (parse.GetValue(coordinator) is { } remote)
            {
                if (parse.GetValue(atlas.File) is not null || parse.GetValue(atlasName) is null)
                {
                    throw new UsageException("with --coordinator, name the atlas with --atlas ATLAS_ID instead of giving a file");
                }

                if (single is null || parse.GetValue(learn) || parse.GetValue(choice.Model) != "nn1")
                {
                    throw new UsageException("with --coordinator, ask one point with --at (batches, --learn and --model work on atlas files)");
                }

                var url = ServeCommand.Url(remote, "--coordinator");
                return await ClusterAsk.RunAsync(
                    url, security.Resolve(parse, url, "--coordinator"), parse.GetValue(atlasName)!, parse.GetValue(version) ?? 0, single, parse.GetValue(verify) == "full",
                    parse.GetValue(direct), parse.GetValue(json), output, cancellation).ConfigureAwait(false);
            }

            if (parse.GetValue(atlas.File) is null)
            {
                throw new UsageException("give the atlas FILE (or --coordinator URL --atlas ATLAS_ID)");
            }

            var source = Path.GetFileName(parse.GetValue(atlas.File)!);
            using var store = atlas.Open(parse);
            var snapshot = atlas.Load(parse, store, parse.GetValue(version));
            var samples = SampleSet.From(snapshot);
            var classifier = choice.Create(parse, store, snapshot, samples, source);
            var resolver = AtlasResolver.Create(store, snapshot, classifier, ResolveOptions.Default with { VerifyFull = parse.GetValue(verify) == "full" });
            var family = snapshot.Family;
            var answered = new List<(double[] Point, ResolveAnswer Answer)>();
            var exitCode = CommandLine.Success;
            if (single is not null)
            {
                var point = ParameterPoint.Parse(single, family);
                var answer = resolver.Ask(point);
                answered.Add((point, answer));
                if (parse.GetValue(json))
                {
                    JsonOutput.Write(output, writer => WriteAnswer(writer, family, point, answer));
                }
                else
                {
                    WriteText(output, family, point, answer);
                }
            }
            else
            {
                var rows = PointFile.Read(batch!, family);
                var answers = new List<(PointFile.Row Row, ResolveAnswer? Answer)>();
                foreach (var row in rows)
                {
                    if (row.Error is not null)
                    {
                        error.WriteLine($"{Path.GetFileName(batch)}: {row.Error}");
                        answers.Add((row, null));
                        exitCode = CommandLine.InvalidInput;
                        continue;
                    }

                    var answer = resolver.Ask(row.Point!);
                    answers.Add((row, answer));
                    answered.Add((row.Point!, answer));
                }

                WriteBatch(parse.GetValue(outFile)!, family, answers);
                var fast = answers.Count(a => a.Answer?.Method == "real-track");
                output.WriteLine($"answered    {answered.Count} of {rows.Count} points ({fast} by real-only tracking, {answered.Count - fast} by a full solve) into {parse.GetValue(outFile)}");
            }

            if (parse.GetValue(learn) && AtlasResolver.Learn(store, snapshot, answered) is { } learned)
            {
                output.WriteLine($"learned     {answered.Count(a => a.Answer.Method == "full" && !a.Answer.OutsideBox)} points kept as samples in atlas version {learned}");
            }

            return exitCode;
        });
        return command;
    }

    internal static void WriteAnswer(Utf8JsonWriter writer, FamilyDefinition family, double[] point, ResolveAnswer answer)
    {
        writer.WriteStartObject();
        writer.WriteStartObject("parameters");
        for (var k = 0; k < point.Length; k++)
        {
            writer.WriteNumber(family.Parameters[k].Name, point[k]);
        }

        writer.WriteEndObject();
        writer.WriteNumber("realCount", answer.RealCount);
        writer.WriteString("method", answer.Method);
        writer.WriteBoolean("certified", answer.Certified);
        writer.WriteNumber("atlasVersion", answer.AtlasVersion);
        writer.WriteNumber("predictedLabel", answer.PredictedLabel);
        writer.WriteBoolean("outsideBox", answer.OutsideBox);
        if (answer.StartSample is not null)
        {
            writer.WriteString("startSample", answer.StartSample);
        }

        if (answer.Verified is { } verified)
        {
            writer.WriteBoolean("verified", verified);
        }

        writer.WriteStartArray("rejections");
        foreach (var rejection in answer.Rejections)
        {
            writer.WriteStringValue(rejection);
        }

        writer.WriteEndArray();
        FiberOutput.WriteSolutions(writer, family.Unknowns, answer.Solutions);
        writer.WriteEndObject();
    }

    private static void WriteText(TextWriter output, FamilyDefinition family, double[] point, ResolveAnswer answer)
    {
        output.WriteLine($"at          {ParameterPoint.Format(family, point)}{(answer.OutsideBox ? "  (outside the atlas box: solved in full)" : string.Empty)}");
        var how = answer.Method == "real-track" ? $"real-only tracking from the {answer.StartSample}" : $"a full solve (parameter homotopy from the {answer.StartSample ?? "family's start fiber"})";
        output.WriteLine($"method      {answer.Method}: {how}");
        foreach (var rejection in answer.Rejections)
        {
            output.WriteLine($"            tried {rejection}");
        }

        output.WriteLine($"real count  {answer.RealCount} ({(answer.Certified ? "certified" : "not certified")}; atlas version {answer.AtlasVersion}, predicted label {answer.PredictedLabel})");
        if (answer.Verified is { } verified)
        {
            output.WriteLine($"verified    {(verified ? "the full solve agrees" : "the full solve DISAGREES")}");
        }

        if (answer.Solutions.Count > 0)
        {
            output.WriteLine();
            output.WriteLine($"  #  {string.Join("  ", family.Unknowns.Select(u => $"{u,14}"))}  {"residual",9}  certified");
            for (var r = 0; r < answer.Solutions.Count; r++)
            {
                var s = answer.Solutions[r];
                var row = string.Join("  ", s.Values.Select(v => string.Create(CultureInfo.InvariantCulture, $"{v.Real,14:G10}")));
                output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{r + 1,3}  {row}  {s.Residual,9:E1}  {(s.Certified ? "yes" : "no")}"));
            }
        }

        output.WriteLine();
        output.WriteLine($"note: {Certificate.FloatingPointCaveat}.");
        output.WriteLine(FiberOutput.Caution);
    }

    private static void WriteBatch(string path, FamilyDefinition family, List<(PointFile.Row Row, ResolveAnswer? Answer)> answers)
    {
        try
        {
            if (path.EndsWith(".json", StringComparison.OrdinalIgnoreCase))
            {
                using var stream = File.Create(path);
                using var writer = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true });
                writer.WriteStartArray();
                foreach (var (row, answer) in answers)
                {
                    if (answer is null)
                    {
                        writer.WriteStartObject();
                        writer.WriteNumber("row", row.Number);
                        writer.WriteString("error", row.Error);
                        writer.WriteEndObject();
                    }
                    else
                    {
                        WriteAnswer(writer, family, row.Point!, answer);
                    }
                }

                writer.WriteEndArray();
                return;
            }

            var widest = answers.Max(a => a.Answer?.RealCount ?? 0);
            var text = new StringBuilder();
            var header = new List<string>(family.Parameters.Select(p => p.Name)) { "real_count", "method", "certified", "error" };
            for (var r = 1; r <= widest; r++)
            {
                header.AddRange(family.Unknowns.Select(u => $"{u}_{r}"));
            }

            text.AppendJoin(',', header).Append('\n');
            foreach (var (row, answer) in answers)
            {
                var cells = new List<string>();
                cells.AddRange(row.Point is { } point ? point.Select(v => v.ToString("R", CultureInfo.InvariantCulture)) : row.Raw.Take(family.Parameters.Count).Select(Quote));
                cells.Add(answer?.RealCount.ToString(CultureInfo.InvariantCulture) ?? string.Empty);
                cells.Add(answer?.Method ?? string.Empty);
                cells.Add(answer is null ? string.Empty : answer.Certified ? "true" : "false");
                cells.Add(Quote(row.Error ?? string.Empty));
                foreach (var solution in answer?.Solutions ?? [])
                {
                    cells.AddRange(solution.Values.Select(v => v.Real.ToString("R", CultureInfo.InvariantCulture)));
                }

                text.AppendJoin(',', cells).Append('\n');
            }

            File.WriteAllText(path, text.ToString());
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new InputException(path, string.Empty, $"cannot write the answers: {e.Message}");
        }
    }

    private static string Quote(string cell) =>
        cell.IndexOfAny([',', '"', '\n', '\r']) >= 0 ? $"\"{cell.Replace("\"", "\"\"", StringComparison.Ordinal)}\"" : cell;
}
